"""Damaged checkpoints: detected, recomputed with a warning, and the scan still exact.

Reference: an uninterrupted scan of the same function, grid and seed (every item's numbers
come from its own seed, so the resumed scan must equal it bit for bit), and hashlib's
SHA-256 for the stored checksum (Python standard library).
"""

import hashlib
import json
import os

import numpy as np
import pytest

import switchlaw as sl
from switchlaw import CheckpointWarning
from switchlaw.analysis._checkpoint import checksum

GRID = {"x": np.linspace(0.0, 1.0, 12)}
CALLS = []


def noisy(point, rng):
    CALLS.append(point["x"])
    return {"value": point["x"] ** 2 + rng.normal(), "draws": rng.random(3)}


def scan(path=None, seed=7):
    return sl.scan(noisy, GRID, seed=seed, checkpoint=path, batch_size=3, progress=False)


def same(a, b):
    assert a["value"].values.tobytes() == b["value"].values.tobytes()
    assert a["draws"].values.tobytes() == b["draws"].values.tobytes()
    assert np.array_equal(a["seed"].values, b["seed"].values)


def batches(path):
    return sorted(p for p in os.listdir(path) if p.startswith("batch-"))


@pytest.fixture
def checkpoint(tmp_path):
    path = tmp_path / "ck"
    scan(path)
    assert len(batches(path)) == 4
    return path


def test_batches_carry_a_checksum_of_their_contents(checkpoint):
    name = batches(checkpoint)[0]
    with np.load(checkpoint / name) as data:
        stored = str(data["checksum"])
        mine = checksum(data["items"], data["seeds"], tuple(data["keys"].tolist()),
                        tuple(data[f"v{j}"] for j in range(len(data["keys"]))))
        digest = hashlib.sha256()
        for array in (data["items"], data["seeds"], data["keys"], data["v0"], data["v1"]):
            array = np.ascontiguousarray(array)
            digest.update(f"{array.dtype.str}{array.shape}".encode())
            digest.update(array.tobytes())
    assert stored == mine == digest.hexdigest()


def _resume_and_compare(path, damaged: int, match: str):
    reference = scan()
    CALLS.clear()
    with pytest.warns(CheckpointWarning, match=match) as caught:
        resumed = scan(path)
    same(resumed, reference)
    assert len([w for w in caught if issubclass(w.category, CheckpointWarning)]) == damaged
    assert len(CALLS) == 3 * damaged  # only the damaged batches were computed again
    assert len(batches(path)) == 4 and len([p for p in os.listdir(path) if p.startswith("corrupt-")]) == damaged
    CALLS.clear()
    again = scan(path)  # the repaired checkpoint is whole: nothing computed, no warning
    same(again, reference)
    assert CALLS == []


def test_a_flipped_byte_is_detected(checkpoint):
    name = checkpoint / batches(checkpoint)[1]
    raw = bytearray(name.read_bytes())
    # Flip a byte of the stored values (an uncompressed .npz keeps array bytes as they are).
    with np.load(name) as data:
        needle = data["v0"].tobytes()
    at = raw.find(needle)
    assert at > 0
    raw[at + 3] ^= 0x40
    name.write_bytes(bytes(raw))
    _resume_and_compare(checkpoint, 1, "Bad CRC-32")  # the zip member's own CRC catches it


def test_values_changed_in_a_valid_file_are_detected(checkpoint):
    # Rewritten as a valid .npz with one value changed: only the stored checksum catches it.
    name = checkpoint / batches(checkpoint)[3]
    with np.load(name) as data:
        arrays = {key: data[key] for key in data.files}
    arrays["v0"] = arrays["v0"].copy()
    arrays["v0"][1] += 1e-12
    with open(name, "wb") as stream:
        np.savez(stream, **arrays)
    _resume_and_compare(checkpoint, 1, "checksum does not match")


def test_a_truncated_batch_is_detected(checkpoint):
    name = checkpoint / batches(checkpoint)[2]
    raw = name.read_bytes()
    name.write_bytes(raw[: len(raw) // 2])
    _resume_and_compare(checkpoint, 1, "cannot be read")


def test_an_empty_batch_file_is_detected(checkpoint):
    (checkpoint / batches(checkpoint)[0]).write_bytes(b"")
    _resume_and_compare(checkpoint, 1, "cannot be read")


def test_two_swapped_batches_are_detected(checkpoint):
    first, second = (checkpoint / n for n in batches(checkpoint)[:2])
    swap = checkpoint / "swap"
    os.replace(first, swap)
    os.replace(second, first)
    os.replace(swap, second)
    _resume_and_compare(checkpoint, 2, "another batch's file name")


def test_batches_of_another_seed_are_not_used(tmp_path, checkpoint):
    # A checkpoint written with seed 7 whose manifest was edited to say seed 8: the batches
    # carry the hash of the scan that wrote them, so none of them is taken.
    manifest = json.loads((checkpoint / "manifest.json").read_text(encoding="utf-8"))
    manifest["fingerprint"]["seed"] = 8
    (checkpoint / "manifest.json").write_text(json.dumps(manifest))
    CALLS.clear()
    with pytest.warns(CheckpointWarning, match="different scan"):
        resumed = scan(checkpoint, seed=8)
    same(resumed, scan(seed=8))
    assert len(CALLS) >= 12


def test_a_changed_seed_is_still_refused_as_another_scan(checkpoint):
    with pytest.raises(sl.InputError, match="belongs to a different scan"):
        scan(checkpoint, seed=9)
