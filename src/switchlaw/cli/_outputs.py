"""Output folders that appear whole or not at all."""

from __future__ import annotations

import os
import shutil
import tempfile
from contextlib import contextmanager
from pathlib import Path

#: Formats a study's [exports] section may ask for.
EXPORT_FORMATS = ("csv", "netcdf", "sbml")


class OutputExists(FileExistsError):
    pass


@contextmanager
def atomic_folder(target, *, force: bool = False):
    """Yield a temporary folder next to ``target``; on success it replaces ``target``.

    Nothing is left at ``target`` if the body raises. An existing ``target`` is refused
    unless ``force`` (then it is replaced only after the new folder is complete).
    """
    target = Path(target).resolve()
    if target.exists() and not force:
        raise OutputExists(f"--out {target} already exists (use --force to replace it)")
    target.parent.mkdir(parents=True, exist_ok=True)
    work = Path(tempfile.mkdtemp(prefix=f".{target.name}.", dir=target.parent))
    try:
        yield work
    except BaseException:
        shutil.rmtree(work, ignore_errors=True)
        raise
    backup = None
    if target.exists():
        backup = target.with_name(f".{target.name}.old-{os.getpid()}")
        os.replace(target, backup)
    os.replace(work, target)
    if backup is not None:
        shutil.rmtree(backup, ignore_errors=True)


def write_text(path: Path, text: str) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(text, encoding="utf-8")
