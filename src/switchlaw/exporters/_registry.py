"""The export driver: one registry of formats, checks done once, files written atomically.

Each format lives in its own module and registers a :class:`Format`: the objects it accepts,
the suffixes that select it, its options (with defaults) and a writer that returns the bytes
of every file it produces. The driver validates, builds every file in memory, then writes
them to temporary files in the target folder and renames them into place, so a failure
leaves nothing half-written.
"""

from __future__ import annotations

import math
import os
import tempfile
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

import numpy as np

from .._errors import InputError

#: Marks an option that has no default and must be given.
REQUIRED = object()


@dataclass(frozen=True)
class Format:
    """One export format.

    Attributes
    ----------
    name : str
    suffixes : tuple of str
        File suffixes that select this format when ``format`` is not given.
    accepts : tuple of str
        Names of the classes it exports (``"SwitchingLaw"``, ``"MeanField"``, ``"FormulaFit"``).
    options : dict
        Option name -> default (:data:`REQUIRED` when it must be given).
    write : callable
        ``write(obj, path, **options) -> (dict[Path, bytes], inputs_sha256)``.
    description : str
    """

    name: str
    suffixes: tuple
    accepts: tuple
    options: dict
    write: Callable
    description: str


@dataclass(frozen=True, repr=False)
class Exported:
    """What :func:`export` wrote.

    Attributes
    ----------
    format : str
    paths : tuple of Path
        Every file written, main file first (a CSV table is followed by its JSON sidecar).
    inputs_sha256 : str
        SHA-256 of the exported object's canonical inputs (see ``docs/file-formats.md``).
    converged : bool
        Whether the law converged at every density (``False`` only with
        ``allow_unconverged=True``; then the files say so).
    """

    format: str
    paths: tuple
    inputs_sha256: str
    converged: bool

    def __repr__(self) -> str:
        names = ", ".join(p.name for p in self.paths)
        mark = "" if self.converged else ", NOT converged (marked)"
        return f"Exported({self.format}: {names}; inputs sha256 {self.inputs_sha256[:12]}...{mark})"


_REGISTRY: dict[str, Format] = {}


def register(fmt: Format) -> Format:
    _REGISTRY[fmt.name] = fmt
    return fmt


def formats() -> tuple:
    """Names of the registered formats, in registration order."""
    return tuple(_REGISTRY)


def _format_for(path: Path, name) -> Format:
    if name is not None:
        if name not in _REGISTRY:
            valid = ", ".join(repr(n) for n in _REGISTRY)
            raise InputError(f"`format` must be one of {valid} (got {name!r})")
        return _REGISTRY[name]
    suffix = path.suffix.lower()
    for fmt in _REGISTRY.values():
        if suffix in fmt.suffixes:
            return fmt
    known = ", ".join(f"{s!r} ({f.name})" for f in _REGISTRY.values() for s in f.suffixes)
    valid = ", ".join(repr(n) for n in _REGISTRY)
    raise InputError(
        f"`format` could not be inferred from the suffix {suffix or '(none)'!r} of `path`; "
        f"known suffixes are {known}; or give format= one of {valid}"
    )


def _options(fmt: Format, given: dict) -> dict:
    unknown = sorted(set(given) - set(fmt.options))
    if unknown:
        valid = ", ".join(repr(o) for o in fmt.options) or "none"
        raise InputError(
            f"option {unknown[0]!r} does not apply to format {fmt.name!r}; its options are {valid}"
        )
    options = {name: given.get(name, default) for name, default in fmt.options.items()}
    missing = [name for name, value in options.items() if value is REQUIRED]
    if missing:
        raise InputError(f"format {fmt.name!r} needs the option `{missing[0]}` (got none)")
    return options


def check_law(law, *, allow_unconverged: bool, name: str = "obj") -> None:
    """Refuse non-finite values and, unless allowed, a law that did not converge everywhere."""
    arrays = {
        "densities": law.densities, "state_values": law.state_values, "table": law.table,
        "state_probs": law.state_probs, "information_bits": law.information_bits,
        "expected_payoff": law.expected_payoff,
    }
    if np.issubdtype(np.asarray(law.states).dtype, np.number):
        arrays["states"] = law.states
    for field, values in arrays.items():
        values = np.asarray(values, dtype=float)
        bad = ~np.isfinite(values)
        if bad.any():
            where = tuple(int(i) for i in np.argwhere(bad)[0])
            raise InputError(
                f"`{name}.{field}` must be finite to export; entry {where} is {float(values[where])!r}"
            )
    betas = np.asarray(law.betas, dtype=float)
    bad = np.isnan(betas) | (betas == -math.inf)
    if bad.any():
        i = int(np.argmax(bad))
        raise InputError(
            f"`{name}.betas` must be finite or +inf (a budget that does not bind); "
            f"entry {i} is {float(betas[i])!r}"
        )
    if not math.isfinite(float(law.setting)):
        raise InputError(f"`{name}.setting` must be finite to export (got {float(law.setting)!r})")
    if not allow_unconverged and not np.all(law.converged):
        failed = np.flatnonzero(~np.asarray(law.converged, dtype=bool))
        raise InputError(
            f"`{name}` did not converge at {failed.size} of {law.densities.size} densities "
            f"(first at density {float(law.densities[failed[0]])!r}); refusing to export it; "
            "pass allow_unconverged=True to export it marked as not converged"
        )


def write_atomically(files: dict, *, overwrite: bool) -> tuple:
    """Write every ``path -> bytes`` through a temporary file in the same folder, then rename.

    Either every file lands or none does (temporary files are removed on any error; files
    that did not exist before are removed again if a later rename fails).
    """
    for path in files:
        if not path.parent.is_dir():
            raise InputError(f"`path` must be in an existing folder (got {str(path.parent)!r})")
        if path.exists() and not overwrite:
            raise InputError(
                f"`path` {str(path)!r} exists; refusing to replace it (pass overwrite=True)"
            )
    temporary: dict[Path, str] = {}
    placed: list[Path] = []
    try:
        for path, content in files.items():
            handle, name = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=path.parent)
            temporary[path] = name
            with os.fdopen(handle, "wb") as stream:
                stream.write(content)
                stream.flush()
                os.fsync(stream.fileno())
            os.chmod(name, 0o666 & ~_umask())  # mkstemp makes 0600; follow the user's umask
        existed = {path: path.exists() for path in files}
        for path, name in temporary.items():
            os.replace(name, path)
            if not existed[path]:
                placed.append(path)
    except BaseException:
        for name in temporary.values():
            if os.path.exists(name):
                os.unlink(name)
        for path in placed:
            path.unlink(missing_ok=True)
        raise
    return tuple(files)


def export(obj, path, *, format=None, overwrite=False, allow_unconverged=False, **options) -> Exported:
    """Write a switching law, a mean-field model or a closed-form fit for another simulator.

    Parameters
    ----------
    obj : SwitchingLaw, MeanField or FormulaFit
        What to export; each format says what it accepts (see :data:`EXPORT_FORMATS` and
        ``docs/file-formats.md``).
    path : str or Path
        The main output file, in an existing folder. A CSV table also gets a JSON sidecar at
        ``path`` + ``".json"``.
    format : str, optional
        One of :data:`EXPORT_FORMATS`; inferred from the suffix of ``path`` when omitted
        (``.csv``, ``.json``, ``.nc``, ``.xml``/``.sbml``, ``.py``, ``.c``, ``.tex``).
    overwrite : bool
        Replace existing files; otherwise an existing file is an error and nothing is written.
    allow_unconverged : bool
        Export a law that did not converge at every density, marked as such in the files;
        otherwise such a law is refused.
    **options
        Options of the chosen format (an unknown one is an error that lists the valid ones):
        ``study`` (tables, SBML): a JSON-serialisable description of the study, stored
        verbatim; ``dt``, ``tau``, ``time_unit`` (step tables); ``law``, ``initial``,
        ``time_unit``, ``fractions``, ``tolerance``, ``variant`` (``"density"`` for ODE
        clients, ``"counts"`` for stochastic ones) and ``system_size`` (cells at density 1,
        with ``variant="counts"``) (SBML); ``phenotype``, ``kind``, ``per_density`` (code,
        when exporting a law rather than a fit).

    Returns
    -------
    Exported
        The paths written and the hash of the inputs.

    Raises
    ------
    InputError
        Unknown format or option, existing file without ``overwrite=True``, a law that did
        not converge without ``allow_unconverged=True``, non-finite values, or an object the
        format does not accept. Nothing is written then.

    Notes
    -----
    Numbers are written so that they read back to the identical float64 (shortest
    round-trip decimal form). Files carry no timestamp: the same input gives byte-identical
    files.

    Examples
    --------
    >>> import tempfile, pathlib, numpy as np, switchlaw as sl
    >>> from switchlaw.exporters import export, read_table
    >>> payoff = {"divide": sl.Linear(1 / 6, 0.0), "move": sl.Linear(-1 / 6, 1.0)}
    >>> law = sl.derive_law(payoff, lambda rho: sl.occupancy(6, rho),
    ...                     densities=np.linspace(0, 1, 5), beta=2.0)
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> done = export(law, folder / "law.csv")
    >>> [p.name for p in done.paths]
    ['law.csv', 'law.csv.json']
    >>> table = read_table(folder / "law.csv")
    >>> bool((table["probability"].values == law.table).all())
    True
    """
    from ..laws._law import SwitchingLaw

    path = Path(path)
    fmt = _format_for(path, format)
    kind = type(obj).__name__
    if kind not in fmt.accepts:
        accepted = " or ".join(fmt.accepts)
        raise InputError(f"format {fmt.name!r} exports a {accepted} (got {kind})")
    opts = _options(fmt, options)
    law = obj if isinstance(obj, SwitchingLaw) else opts.get("law")
    if law is not None:
        if not isinstance(law, SwitchingLaw):
            raise InputError(f"`law` must be a SwitchingLaw (got {type(law).__name__})")
        check_law(law, allow_unconverged=allow_unconverged, name="obj" if law is obj else "law")
    files, digest = fmt.write(obj, path, **opts)
    converged = True if law is None else bool(np.all(law.converged))
    paths = write_atomically(files, overwrite=bool(overwrite))
    return Exported(fmt.name, paths, digest, converged)


def _umask() -> int:
    current = os.umask(0)
    os.umask(current)
    return current
