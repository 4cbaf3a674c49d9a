"""Checkpoints of a scan: finished batches on disk, so that a killed scan resumes.

A checkpoint is a directory holding ``manifest.json`` (what the scan is: grid, function,
seed, study) and one ``batch-*.npz`` file per finished batch. Every file is written to a
temporary name and moved into place with ``os.replace``, so a file is either complete or
absent; leftovers of a write cut short are removed when the scan resumes. A rerun whose
manifest differs is refused with the differences listed, and nothing is touched.
"""

from __future__ import annotations

import hashlib
import json
import os
import tempfile

import numpy as np

from .._errors import InputError
from ._batch import BatchResult

MANIFEST = "manifest.json"
FORMAT = "switchlaw scan checkpoint"
VERSION = 1


def _atomic_write(directory: str, name: str, write) -> None:
    handle, temporary = tempfile.mkstemp(dir=directory, prefix=".tmp-", suffix=os.path.splitext(name)[1])
    try:
        with os.fdopen(handle, "wb") as stream:
            write(stream)
            stream.flush()
            os.fsync(stream.fileno())
        os.replace(temporary, os.path.join(directory, name))
    except BaseException:
        if os.path.exists(temporary):
            os.remove(temporary)
        raise


def _describe(parameter: dict) -> str:
    return (f"{parameter['size']} values {parameter['first']!r}..{parameter['last']!r}")


def differences(old: dict, new: dict) -> list[str]:
    """Readable differences between two fingerprints (empty when they match)."""
    found = []
    for key in ("function", "seed", "study", "design", "base_samples", "replicates"):
        if old.get(key) != new.get(key):
            found.append(f"{key} is {old.get(key)!r} there, {new.get(key)!r} now")
    before = {p["name"]: p for p in old.get("parameters", [])}
    after = {p["name"]: p for p in new.get("parameters", [])}
    if list(before) != list(after):
        found.append(f"parameters are {list(before)} there, {list(after)} now")
    for name in after:
        if name in before and before[name] != after[name]:
            found.append(f"values of {name!r} differ ({_describe(before[name])} there, "
                         f"{_describe(after[name])} now)")
    return found


class Memory:
    """Finished batches kept in memory only (no checkpoint)."""

    def __init__(self):
        self.batches: list[BatchResult] = []

    def add(self, batch: BatchResult) -> None:
        self.batches.append(batch)

    def done(self) -> set:
        return {int(i) for b in self.batches for i in b.items}

    def prepare(self) -> None:
        pass


class Checkpoint(Memory):
    """Finished batches in a directory, read back on a rerun with the same fingerprint."""

    def __init__(self, path, fingerprint: dict, items: int):
        super().__init__()
        try:
            self.path = os.fspath(path)
        except TypeError:
            raise InputError(f"`checkpoint` must be a path (got {type(path).__name__})") from None
        self.fingerprint = fingerprint
        self.items = items
        if os.path.exists(self.path) and not os.path.isdir(self.path):
            raise InputError(f"`checkpoint` must be a directory; {self.path!r} is a file")
        manifest = os.path.join(self.path, MANIFEST)
        if os.path.isfile(manifest):
            self._check_manifest(manifest)
            self._load()
        elif os.path.isdir(self.path) and os.listdir(self.path):
            raise InputError(
                f"`checkpoint` {self.path!r} is a non-empty directory without {MANIFEST}: not a "
                "scan checkpoint; give a new or empty directory"
            )

    def _check_manifest(self, manifest: str) -> None:
        try:
            with open(manifest, encoding="utf-8") as stream:
                stored = json.load(stream)
        except (OSError, ValueError) as exc:
            raise InputError(f"`checkpoint` manifest {manifest!r} cannot be read ({exc})") from None
        if stored.get("format") != FORMAT or stored.get("version") != VERSION:
            raise InputError(
                f"`checkpoint` {self.path!r} is not a version-{VERSION} scan checkpoint "
                f"(format {stored.get('format')!r}, version {stored.get('version')!r})"
            )
        found = differences(stored.get("fingerprint", {}), self.fingerprint)
        if found:
            raise InputError(
                f"`checkpoint` {self.path!r} belongs to a different scan, so it was not used: "
                + "; ".join(found)
                + ". Give a new checkpoint path, or delete this one to start over"
            )

    def _load(self) -> None:
        for name in sorted(os.listdir(self.path)):
            full = os.path.join(self.path, name)
            if name.startswith(".tmp-"):
                os.remove(full)  # a write cut short by a kill: never moved into place
                continue
            if not (name.startswith("batch-") and name.endswith(".npz")):
                continue
            try:
                with np.load(full, allow_pickle=False) as data:
                    keys = tuple(data["keys"].tolist())
                    batch = BatchResult(
                        data["items"], data["seeds"], keys,
                        tuple(data[f"v{j}"] for j in range(len(keys))), float(data["seconds"]),
                    )
            except (OSError, ValueError, KeyError) as exc:
                raise InputError(f"`checkpoint` batch file {full!r} cannot be read ({exc})") from None
            if batch.items.size and (batch.items.min() < 0 or batch.items.max() >= self.items):
                raise InputError(f"`checkpoint` batch file {full!r} holds items outside this scan")
            self.batches.append(batch)

    def prepare(self) -> None:
        """Create the directory and manifest (once the scan is known to be runnable)."""
        os.makedirs(self.path, exist_ok=True)
        if not os.path.isfile(os.path.join(self.path, MANIFEST)):
            text = json.dumps({"format": FORMAT, "version": VERSION, "fingerprint": self.fingerprint},
                              indent=1).encode()
            _atomic_write(self.path, MANIFEST, lambda stream: stream.write(text))

    def add(self, batch: BatchResult) -> None:
        arrays = {"items": batch.items, "seeds": batch.seeds, "keys": np.array(batch.keys, dtype=str),
                  "seconds": np.float64(batch.seconds)}
        arrays.update({f"v{j}": value for j, value in enumerate(batch.values)})
        tag = hashlib.sha256(batch.items.tobytes()).hexdigest()[:8]
        name = f"batch-{int(batch.items[0]):012d}-{batch.items.size:06d}-{tag}.npz"
        _atomic_write(self.path, name, lambda stream: np.savez(stream, **arrays))
        super().add(batch)
