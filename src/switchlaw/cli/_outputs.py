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


#: Every folder written by ``switchlaw run``/``demo`` carries this marker; ``--force`` only
#: ever replaces a folder that has it.
MARKER = ".switchlaw-output"


def _check_replaceable(target: Path) -> None:
    cwd = Path.cwd().resolve()
    if target == cwd or target in cwd.parents:
        raise OutputExists(f"--out {target} contains the current folder; choose a new folder")
    if not target.is_dir():
        raise OutputExists(f"--out {target} exists and is not a folder; choose another --out")
    if not (target / MARKER).is_file():
        raise OutputExists(
            f"--out {target} exists and was not written by switchlaw; --force only replaces "
            "earlier switchlaw output folders"
        )


@contextmanager
def atomic_folder(target, *, force: bool = False):
    """Yield a temporary folder next to ``target``; on success it replaces ``target``.

    Nothing is left at ``target`` if the body raises. An existing ``target`` is refused
    unless ``force`` and it is an earlier switchlaw output folder (then it is replaced only
    after the new folder is complete). Permissions follow the user's umask.
    """
    target = Path(target).resolve()
    if target.exists():
        if not force:
            raise OutputExists(f"--out {target} already exists (use --force to replace it)")
        _check_replaceable(target)
    target.parent.mkdir(parents=True, exist_ok=True)
    work = Path(tempfile.mkdtemp(prefix=f".{target.name}.", dir=target.parent))
    umask = os.umask(0)
    os.umask(umask)
    try:
        yield work
        (work / MARKER).write_text("written by switchlaw\n", encoding="utf-8")
        for path in [work, *work.rglob("*")]:
            os.chmod(path, (0o777 if path.is_dir() else 0o666) & ~umask)
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
