"""Checkpoints of a scan: finished batches on disk, so that a killed scan resumes.

A checkpoint is a directory holding ``manifest.json`` (what the scan is: grid, function,
seed, study) and one ``batch-*.npz`` file per finished batch. Every file is written to a
temporary name and moved into place with ``os.replace``, so a file is either complete or
absent; leftovers of a write cut short are removed when the scan resumes. A rerun whose
manifest differs is refused with the differences listed, and nothing is touched.

Each batch file carries a SHA-256 checksum of its contents and the hash of the scan that
wrote it (grid, function, study, seed). On resuming, a batch that cannot be read, fails its
checksum, belongs to another scan, sits under another batch's name, or holds seeds that are
not its items' seeds is set aside (renamed ``corrupt-*``) with a :class:`CheckpointWarning`,
and its items are computed again; since every item's numbers come from its own seed, the
resumed scan still equals the uninterrupted one bit for bit.
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
VERSION = 2
#: Versions read back (version 1 batches carry no checksum; they get the other checks).
READABLE = (1, 2)


class CheckpointWarning(RuntimeWarning):
    """A checkpoint batch was damaged or foreign; its items are computed again."""


def scan_hash(fingerprint: dict) -> str:
    """SHA-256 of a scan's fingerprint (grid, function, study, seed), as hex."""
    text = json.dumps(fingerprint, sort_keys=True, separators=(",", ":"), default=str)
    return hashlib.sha256(text.encode()).hexdigest()


def checksum(items, seeds, keys, values) -> str:
    """SHA-256 over every array of a batch, with dtypes and shapes, as hex."""
    digest = hashlib.sha256()
    for array in (items, seeds, np.array(keys, dtype=str), *values):
        array = np.ascontiguousarray(array)
        digest.update(f"{array.dtype.str}{array.shape}".encode())
        digest.update(array.tobytes())
    return digest.hexdigest()


def batch_name(items) -> str:
    """The file name of the batch holding ``items`` (first item, count, hash of the items)."""
    tag = hashlib.sha256(np.asarray(items, dtype=np.int64).tobytes()).hexdigest()[:8]
    return f"batch-{int(items[0]):012d}-{len(items):06d}-{tag}.npz"


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
        self.version = VERSION
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
        if not isinstance(stored, dict) or stored.get("format") != FORMAT or stored.get("version") not in READABLE:
            found = stored if not isinstance(stored, dict) else (stored.get("format"), stored.get("version"))
            raise InputError(
                f"`checkpoint` {self.path!r} is not a version-{VERSION} scan checkpoint "
                f"(format and version {found!r})"
            )
        self.version = stored["version"]
        found = differences(stored.get("fingerprint", {}), self.fingerprint)
        if found:
            raise InputError(
                f"`checkpoint` {self.path!r} belongs to a different scan, so it was not used: "
                + "; ".join(found)
                + ". Give a new checkpoint path, or delete this one to start over"
            )

    def _load(self) -> None:
        import warnings

        from ._seeds import item_seeds

        expected_scan = scan_hash(self.fingerprint)
        seen: set = set()
        for name in sorted(os.listdir(self.path)):
            full = os.path.join(self.path, name)
            if name.startswith(".tmp-"):
                os.remove(full)  # a write cut short by a kill: never moved into place
                continue
            if not (name.startswith("batch-") and name.endswith(".npz")):
                continue
            try:
                batch, problem = self._read(full, expected_scan)
                if problem is None:
                    items = [int(i) for i in batch.items]
                    if batch.items.ndim != 1 or not items:
                        problem = "it holds no items"
                    elif min(items) < 0 or max(items) >= self.items:
                        problem = "it holds items outside this scan"
                    elif batch_name(batch.items) != name:
                        problem = "its contents belong to another batch's file name"
                    elif seen.intersection(items) or len(set(items)) != len(items):
                        problem = "it repeats items of another batch"
                    elif not np.array_equal(batch.seeds, item_seeds(
                            self.fingerprint["seed"], items, self.fingerprint.get("replicates"))):
                        problem = "its seeds are not this scan's seeds"
                    elif any(np.shape(v)[:1] != (len(items),) for v in batch.values):
                        problem = "its outputs do not have one row per item"
            except Exception as exc:  # noqa: BLE001 - any damage means: compute it again
                problem = f"it cannot be read ({type(exc).__name__}: {exc})"
            if problem is not None:
                aside = os.path.join(self.path, "corrupt-" + name)
                os.replace(full, aside)
                warnings.warn(
                    f"checkpoint batch {full!r} was not used ({problem}); it was renamed "
                    f"{os.path.basename(aside)!r} and its items are computed again",
                    CheckpointWarning, stacklevel=4,
                )
                continue
            seen.update(int(i) for i in batch.items)
            self.batches.append(batch)

    def _read(self, full: str, expected_scan: str):
        """A batch and None, or None and why the file cannot be trusted."""
        with open(full, "rb") as stream, np.load(stream, allow_pickle=False) as data:
            keys = tuple(data["keys"].tolist())
            batch = BatchResult(
                data["items"], data["seeds"], keys,
                tuple(data[f"v{j}"] for j in range(len(keys))), float(data["seconds"]),
            )
            files = set(data.files)
            stored_sum = str(data["checksum"]) if "checksum" in files else None
            stored_scan = str(data["scan"]) if "scan" in files else None
        if stored_sum is None and self.version >= 2:
            return None, "it has no checksum"
        if stored_sum is not None and stored_sum != checksum(batch.items, batch.seeds, keys, batch.values):
            return None, "its checksum does not match its contents"
        if stored_scan is not None and stored_scan != expected_scan:
            return None, "it was written by a different scan (grid, function, study or seed)"
        if batch.items.dtype.kind not in "iu" or batch.seeds.dtype != np.int64:
            return None, "its items or seeds are not integers"
        return batch, None

    def prepare(self) -> None:
        """Create the directory and manifest (once the scan is known to be runnable)."""
        os.makedirs(self.path, exist_ok=True)
        if not os.path.isfile(os.path.join(self.path, MANIFEST)):
            text = json.dumps({"format": FORMAT, "version": VERSION, "fingerprint": self.fingerprint},
                              indent=1).encode()
            _atomic_write(self.path, MANIFEST, lambda stream: stream.write(text))

    def add(self, batch: BatchResult) -> None:
        arrays = {"items": batch.items, "seeds": batch.seeds, "keys": np.array(batch.keys, dtype=str),
                  "seconds": np.float64(batch.seconds),
                  "checksum": np.array(checksum(batch.items, batch.seeds, batch.keys, batch.values)),
                  "scan": np.array(scan_hash(self.fingerprint))}
        arrays.update({f"v{j}": value for j, value in enumerate(batch.values)})
        _atomic_write(self.path, batch_name(batch.items), lambda stream: np.savez(stream, **arrays))
        super().add(batch)
