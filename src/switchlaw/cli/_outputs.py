"""Output folders: checked before computing, locked while a run writes, replaced only safely.

Rules (the public contract of ``switchlaw run``):

- ``--out`` is checked before any computation: a valid name, a writable parent, not the
  current folder or one of its parents, not a file.
- One run at a time per ``--out``: a lock file next to it (``.NAME.switchlaw-lock``, held
  with ``flock`` for the whole run) makes a second concurrent run stop with a one-line error.
- Every folder switchlaw writes holds a manifest (:data:`MARKER`, JSON) listing the files it
  wrote. ``--force`` deletes only those files; anything else in the folder (the user's own
  notes) is kept, and a clash with a new output's name is refused before anything moves. A
  folder without a manifest is not replaced unless the user asks with ``--into-existing``,
  which writes into it and still keeps every file already there.
- The run writes into a temporary folder next to ``--out`` (``.NAME.switchlaw-tmp-PID-…``);
  temporary folders left by runs that were killed (same naming, process gone) are removed by
  the next run for that ``--out``, which says so.
"""

from __future__ import annotations

import json
import os
import re
import secrets
import shutil
from pathlib import Path

#: Formats a study's [exports] section may ask for.
EXPORT_FORMATS = ("csv", "netcdf", "sbml")

#: Every folder written by ``switchlaw run``/``demo`` carries this manifest.
MARKER = ".switchlaw-output"
MANIFEST_FORMAT = "switchlaw output folder"
#: Longest file name most file systems allow (bytes); the temporary names add a suffix.
NAME_LIMIT = 255
_SUFFIX_ROOM = 48

#: Before manifests, the marker was a plain text file; those folders held only these names.
_LEGACY = re.compile(
    r"^(summary\.json|study\.toml|report\.html|law[\w.-]*\.(csv|nc|json)|scan\.nc|model\.sbml|"
    r"figures/[\w.-]+\.(png|svg))$"
)


class OutputExists(FileExistsError):
    """``--out`` cannot be used as asked (the message is one line)."""


def _say(message: str) -> None:
    import sys

    print(f"switchlaw: {message}", file=sys.stderr)


def check_target(out) -> Path:
    """The absolute ``--out`` path, or :class:`OutputExists` if it can never be written."""
    text = os.fspath(out)
    if not text or "\x00" in text or not text.isprintable():
        raise OutputExists(f"--out {text!r} is not a valid folder name")
    target = Path(os.path.abspath(text))
    name = target.name
    if name in ("", ".", "..") or target.parent == target:
        raise OutputExists(f"--out {text!r} is not a valid folder name")
    if len(os.fsencode(name)) > NAME_LIMIT - _SUFFIX_ROOM:
        raise OutputExists(f"--out name is too long ({len(os.fsencode(name))} bytes; at most "
                           f"{NAME_LIMIT - _SUFFIX_ROOM})")
    cwd = Path.cwd().resolve()
    resolved = target.resolve()
    if resolved == cwd or resolved in cwd.parents:
        raise OutputExists(f"--out {target} contains the current folder; choose a new folder")
    if target.exists() and not target.is_dir():
        raise OutputExists(f"--out {target} exists and is not a folder; choose another --out")
    ancestor = target.parent
    while not ancestor.exists():
        ancestor = ancestor.parent
    if not ancestor.is_dir():
        raise OutputExists(f"--out {target}: {ancestor} is not a folder")
    if not os.access(ancestor, os.W_OK | os.X_OK):
        raise OutputExists(f"--out {target}: folder {ancestor} is not writable")
    return target


def _files(folder: Path) -> set[str]:
    """Relative paths (with /) of every non-folder entry below ``folder``."""
    found = set()
    for root, dirs, names in os.walk(folder):
        for name in names + [d for d in dirs if os.path.islink(os.path.join(root, d))]:
            found.add(Path(root, name).relative_to(folder).as_posix())
    return found


def read_manifest(folder: Path) -> set[str] | None:
    """The files an earlier run wrote into ``folder``; None when switchlaw did not write it."""
    marker = folder / MARKER
    if not marker.is_file() or marker.is_symlink():
        return None
    try:
        text = marker.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError):
        return None
    if text.startswith("written by switchlaw"):  # the plain marker of earlier versions
        return {p for p in _files(folder) if _LEGACY.match(p)}
    try:
        data = json.loads(text)
    except ValueError:
        return None
    if not isinstance(data, dict) or data.get("format") != MANIFEST_FORMAT:
        return None
    files = data.get("files")
    if not isinstance(files, list) or not all(isinstance(f, str) for f in files):
        return None
    return {f for f in files if _inside(f)}


def _inside(relative: str) -> bool:
    parts = Path(relative).parts
    return bool(parts) and not Path(relative).is_absolute() and ".." not in parts and relative != MARKER


def _write_manifest(folder: Path, files) -> None:
    text = json.dumps({"format": MANIFEST_FORMAT, "version": 1,
                       "note": "files written by switchlaw; --force deletes only these",
                       "files": sorted(files)}, indent=1) + "\n"
    temporary = folder / f"{MARKER}.{secrets.token_hex(4)}"
    temporary.write_text(text, encoding="utf-8")
    os.replace(temporary, folder / MARKER)


def _pid_alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


class OutputFolder:
    """A context manager for one run's output: lock, temporary folder, safe commit.

    ``with OutputFolder(out, force=...) as folder:`` checks ``out`` and takes the lock;
    the run writes into ``folder.work`` and calls ``folder.commit()``. Leaving the block
    without a commit (an error, a kill) removes the temporary folder and every parent folder
    this run created; the lock is released either way.
    """

    def __init__(self, out, *, force: bool = False, into_existing: bool = False, say=_say):
        self.target = check_target(out)
        self.force, self.into_existing, self.say = force, into_existing, say
        self.work: Path | None = None
        self._lock = None
        self._created: list[Path] = []
        self._old: set[str] | None = None

    # -------------------------------------------------------------------- entering
    def __enter__(self) -> "OutputFolder":
        self._check_existing()
        missing = []
        parent = self.target.parent
        while not parent.exists():
            missing.append(parent)
            parent = parent.parent
        try:
            for folder in reversed(missing):
                folder.mkdir()
                self._created.append(folder)
            self._acquire()
            self._clean_stale()
            self._check_existing()  # again, now that no other run can change it
            self.work = self.target.parent / (
                f".{self.target.name}.switchlaw-tmp-{os.getpid()}-{secrets.token_hex(4)}")
            self.work.mkdir()
        except OutputExists:
            self._leave()
            raise
        except OSError as error:
            self._leave()
            raise OutputExists(f"--out {self.target}: cannot write there ({error.strerror})") from None
        except BaseException:
            self._leave()
            raise
        return self

    def _check_existing(self) -> None:
        target = self.target
        if not target.exists():
            self._old = None
            return
        if not target.is_dir():
            raise OutputExists(f"--out {target} exists and is not a folder; choose another --out")
        old = read_manifest(target)
        empty = not any(target.iterdir())
        if old is None and not empty and not self.into_existing:
            raise OutputExists(
                f"--out {target} exists and was not written by switchlaw (no {MARKER} manifest); "
                "--force only replaces earlier switchlaw output; add --into-existing to write "
                "into it (its files are kept)"
            )
        if old is not None and not self.force:
            raise OutputExists(f"--out {target} already exists (use --force to replace it)")
        if old is None and empty and not (self.force or self.into_existing):
            raise OutputExists(f"--out {target} already exists (use --force to replace it)")
        self._old = old or set()

    def _lock_path(self) -> Path:
        return self.target.parent / f".{self.target.name}.switchlaw-lock"

    def _acquire(self) -> None:
        import fcntl

        path = self._lock_path()
        while True:
            handle = open(path, "a+", encoding="utf-8")
            try:
                fcntl.flock(handle, fcntl.LOCK_EX | fcntl.LOCK_NB)
            except BlockingIOError:
                handle.seek(0)
                holder = handle.read().strip() or "unknown"
                handle.close()
                raise OutputExists(
                    f"--out {self.target} is being written by another switchlaw run (process "
                    f"{holder}); wait for it to finish or choose another --out"
                ) from None
            try:
                same = os.stat(path).st_ino == os.fstat(handle.fileno()).st_ino
            except FileNotFoundError:
                same = False
            if same:  # not a lock file that its previous holder unlinked meanwhile
                handle.seek(0)
                handle.truncate()
                handle.write(f"{os.getpid()}\n")
                handle.flush()
                self._lock = handle
                return
            handle.close()

    def _clean_stale(self) -> None:
        """Remove temporary folders of earlier runs for this --out whose process is gone."""
        pattern = re.compile(re.escape(f".{self.target.name}.switchlaw-") + r"(tmp|old)-(\d+)-[0-9a-f]+$")
        for entry in self.target.parent.iterdir():
            match = pattern.match(entry.name)
            if not match or not entry.is_dir() or entry.is_symlink():
                continue
            pid = int(match.group(2))
            if pid != os.getpid() and _pid_alive(pid):
                continue
            shutil.rmtree(entry, ignore_errors=True)
            self.say(f"removed {entry}, left by an earlier run (process {pid}) that did not finish")

    # -------------------------------------------------------------------- leaving
    def __exit__(self, kind, value, traceback) -> None:
        self._leave()

    def _leave(self) -> None:
        if self.work is not None and self.work.exists():
            shutil.rmtree(self.work, ignore_errors=True)
        self.work = None
        if self._lock is not None:
            try:
                os.unlink(self._lock_path())
            except OSError:
                pass
            self._lock.close()
            self._lock = None
        for folder in reversed(self._created):
            if folder.exists() and not self.target.exists():
                try:
                    folder.rmdir()
                except OSError:
                    break
        self._created = []

    def commit(self) -> None:
        """Put the finished files at ``--out``; never deletes a file switchlaw did not write."""
        work, target = self.work, self.target
        umask = os.umask(0)
        os.umask(umask)
        new = _files(work)
        for path in [work, *work.rglob("*")]:
            os.chmod(path, (0o777 if path.is_dir() else 0o666) & ~umask)
        if self._old is None:
            if target.exists():
                raise OutputExists(f"--out {target} appeared while this run was going; nothing was written")
            _write_manifest(work, new)
            os.rename(work, target)
            self.work, self._created = None, []
            return
        real = os.path.realpath(target)
        old = {p for p in self._old
               if ((target / p).is_file() or (target / p).is_symlink())
               and (os.path.realpath((target / p).parent) + os.sep).startswith(real + os.sep)}  # not outside
        for relative in sorted(new):
            if relative not in old and (os.path.lexists(target / relative)):
                raise OutputExists(
                    f"--out {target / relative} is not switchlaw's and a new output has that name; "
                    "move it away and run again (nothing was written)"
                )
            for parent in Path(relative).parents:
                if str(parent) != "." and os.path.lexists(target / parent) and not (target / parent).is_dir():
                    raise OutputExists(
                        f"--out {target / parent} is not a folder but a new output goes in it; "
                        "move it away and run again (nothing was written)"
                    )
        _write_manifest(target, old | new)  # a kill from here on leaves a correct manifest
        backup = target.parent / f".{target.name}.switchlaw-old-{os.getpid()}-{secrets.token_hex(4)}"
        backup.mkdir()
        for relative in sorted(old):
            (backup / relative).parent.mkdir(parents=True, exist_ok=True)
            os.replace(target / relative, backup / relative)
        for relative in sorted(new):
            (target / relative).parent.mkdir(parents=True, exist_ok=True)
            os.replace(work / relative, target / relative)
        _write_manifest(target, new)
        shutil.rmtree(backup, ignore_errors=True)
        for folder in sorted({target / p for rel in old for p in Path(rel).parents if str(p) != "."},
                             key=lambda p: -len(p.parts)):
            try:
                folder.rmdir()  # only folders the old files left empty
            except OSError:
                pass
        shutil.rmtree(work, ignore_errors=True)
        self.work, self._created = None, []


def write_text(path: Path, text: str) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(text, encoding="utf-8")
