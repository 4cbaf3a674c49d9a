"""Study files from Python: load, change a key, run; the same numbers as ``switchlaw run``.

:func:`load_study` applies exactly the validation of ``switchlaw check`` and ``run``
(:func:`._study.load_text`); :meth:`StudyFile.run` calls the same pipeline and, with ``out``,
writes the same output folder through the same safe-writing code (:class:`._outputs.OutputFolder`).
"""

from __future__ import annotations

import copy
import json
import os
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

from .._errors import InputError


@dataclass(frozen=True)
class StudyResults:
    """What one run of a study file computed.

    Attributes
    ----------
    summary : dict
        Exactly the content of the run's ``summary.json`` (JSON types; units as there).
    verdict : dict
        ``summary["verdict"]``: the answer in plain sentences with the numbers they quote.
    law : SwitchingLaw
        The derived switching law over the study's densities.
    model : MeanField or None
        The population model (``None`` without a ``[population]`` section).
    out : pathlib.Path or None
        The output folder written, when :meth:`StudyFile.run` was given ``out``.
    written : tuple of str
        The files written there (empty without ``out``).
    details : object
        Every computed object (scan dataset, bifurcation diagram, regime map, each stage's
        results) as the report uses them.
    """

    summary: dict
    law: object
    model: object = None
    out: Path | None = None
    written: tuple = ()
    details: object = field(default=None, repr=False)

    @property
    def verdict(self) -> dict:
        return self.summary["verdict"]


@dataclass(frozen=True)
class StudyFile:
    """A validated study file: its TOML text, where it came from, and the parsed sections.

    Build one with :func:`load_study` or :func:`demo_study`; change keys with
    :meth:`replace` (which validates again); compute with :meth:`run`.

    Attributes
    ----------
    text : str
        The study's TOML text (what ``study.toml`` of the output folder holds).
    source : str
        The file path, ``"<text>"`` or ``"demo:NAME"``; error lines start with it.
    base_dir : pathlib.Path
        The folder that relative paths in the study (data files) are read from: the study
        file's folder, else the current folder.
    spec : object
        The validated sections (a pydantic model; ``spec.decision.beta`` and so on).
    """

    text: str
    source: str
    base_dir: Path
    spec: object = field(repr=False)

    @property
    def title(self) -> str:
        return self.spec.study.title

    def data(self) -> dict:
        """The study as nested dicts (parsed TOML), a fresh copy each call."""
        return tomllib.loads(self.text)

    def replace(self, changes: dict | None = None, /, **sections) -> "StudyFile":
        """A new, validated study with some keys changed; this one is left as it is.

        Parameters
        ----------
        changes : dict, optional
            Dotted key path -> new value, e.g. ``{"decision.beta": 2.0,
            "population.division.divide": 1.5}``; ``None`` as a value removes the key.
            A list index is written as ``variant[0].name``.
        **sections
            Whole sections by name, e.g. ``regime_map=None`` removes ``[regime_map]`` and
            ``decision={...}`` replaces ``[decision]``.

        Returns
        -------
        StudyFile
            Validated by the same rules as ``switchlaw check``; bad values raise
            :class:`switchlaw.InputError` with one line per problem naming the key.
        """
        data = self.data()
        items = list((changes or {}).items()) + list(sections.items())
        for path, value in items:
            _set(data, str(path), value)
        import tomli_w

        try:
            text = tomli_w.dumps(data)
        except (TypeError, ValueError) as error:
            raise InputError(f"{self.source}: a changed value cannot be written as TOML ({error})") from None
        return _make(text, self.source, self.base_dir, seed=None)

    def run(self, out=None, *, force: bool = False, into_existing: bool = False, quiet: bool = True,
            only: str | None = None, skip: str | None = None, jobs: int | None = None,
            scheduler: str | None = None, yes: bool = False) -> StudyResults:
        """Run every stage of the study (or those ``only``/``skip`` choose) and return the results.

        Parameters
        ----------
        out : str or path, optional
            Write the output folder there, exactly as ``switchlaw run --out`` does (refused
            if it exists unless ``force``/``into_existing``; written atomically).
        force, into_existing : bool
            As ``--force`` and ``--into-existing``.
        quiet : bool
            No progress messages on stderr (default).
        only, skip : str, optional
            Comma-separated stage names, as ``--only``/``--skip``.
        jobs, scheduler : optional
            As ``--jobs``/``--scheduler`` (the results do not depend on them).
        yes : bool
            Run even when the estimated time or memory is above the limit (``--yes``).

        Returns
        -------
        StudyResults
            ``.summary`` holds the numbers ``summary.json`` holds, with their units.
        """
        from . import _pipeline
        from ._estimate import over_limit
        from ._outputs import OutputExists, OutputFolder, check_target
        from ._stages import StageError, select

        refused = over_limit(self.spec)
        if refused and not yes:
            raise InputError(f"{self.source}: {refused}; pass yes=True to run it anyway")
        try:
            stages = select(self.spec, only, skip)
        except StageError as error:
            raise InputError(str(error).replace("--only", "only").replace("--skip", "skip")) from None
        if out is None:
            results = _pipeline.run(self.spec, self.text, quiet=quiet, jobs=jobs, scheduler=scheduler,
                                    stages=stages, base_dir=self.base_dir)
            data = json.loads(json.dumps(_pipeline.summary(results), allow_nan=False))
            return StudyResults(summary=data, law=results.law, model=results.model, details=results)
        try:
            check_target(out)
            with OutputFolder(out, force=force, into_existing=into_existing) as folder:
                results = _pipeline.run(self.spec, self.text, quiet=quiet, jobs=jobs, scheduler=scheduler,
                                        stages=stages, base_dir=self.base_dir)
                written = _pipeline.write_outputs(results, folder.work)
                folder.commit()
                target = folder.target
        except OutputExists as error:
            raise InputError(f"out: {error}".replace("--out ", "")) from None
        data = json.loads((target / "summary.json").read_text(encoding="utf-8"))
        return StudyResults(summary=data, law=results.law, model=results.model, out=target,
                            written=tuple(written), details=results)


_STEP = re.compile(r"^([^.\[\]]+)((?:\[\d+\])*)$")


def _set(data: dict, path: str, value) -> None:
    """Set (or with ``None`` remove) the value at a dotted key path of parsed TOML."""
    steps = []
    for part in path.split("."):
        match = _STEP.match(part)
        if not match:
            raise InputError(f"replace: {path!r} is not a key path (like 'decision.beta' or 'variant[0].name')")
        steps.append(match.group(1))
        steps += [int(i) for i in re.findall(r"\[(\d+)\]", match.group(2))]
    here = data
    for k, step in enumerate(steps[:-1]):
        if isinstance(step, int):
            if not isinstance(here, list) or step >= len(here):
                raise InputError(f"replace: {path!r}: no item {step} at {'.'.join(map(str, steps[:k])) or 'top'}")
            here = here[step]
            continue
        if not isinstance(here, dict):
            raise InputError(f"replace: {path!r}: {step!r} is not inside a table")
        if here.get(step) is None:
            if value is None:
                return
            here[step] = {}
        here = here[step]
    last = steps[-1]
    if isinstance(last, int):
        if not isinstance(here, list) or last >= len(here):
            raise InputError(f"replace: {path!r}: no item {last} there")
        if value is None:
            del here[last]
        else:
            here[last] = copy.deepcopy(value)
        return
    if not isinstance(here, dict):
        raise InputError(f"replace: {path!r}: {last!r} is not inside a table")
    if value is None:
        here.pop(last, None)
    else:
        here[last] = copy.deepcopy(value)


def _make(text: str, source: str, base_dir: Path, *, seed) -> StudyFile:
    from ._study import load_text

    return StudyFile(text=text, source=source, base_dir=Path(base_dir),
                     spec=load_text(text, source, seed=seed, base_dir=base_dir))


def _looks_like_text(value: str) -> bool:
    return "\n" in value or "=" in value or "[" in value


def load_study(path_or_text, *, seed: int | None = None) -> StudyFile:
    """Read and validate a study file, as ``switchlaw check`` does.

    Parameters
    ----------
    path_or_text : str or path-like
        A path to a study file (TOML), or the TOML text itself (any string with a line
        break, ``=`` or ``[`` is taken as text).
    seed : int, optional
        Overrides ``[study] seed`` (as ``--seed``).

    Returns
    -------
    StudyFile
        ``.run()`` computes it; ``.replace({"decision.beta": 2.0})`` changes a key.

    Raises
    ------
    switchlaw.InputError
        The study's problems, one line each, exactly as ``switchlaw check`` prints them.

    Examples
    --------
    >>> import switchlaw as sl
    >>> study = sl.demo_study("colony").replace({"decision.beta": 3.0})  # doctest: +SKIP
    >>> study.run().verdict["regime"]                                     # doctest: +SKIP
    """
    from ._study import read

    if isinstance(path_or_text, str) and _looks_like_text(path_or_text):
        return _make(path_or_text, "<text>", Path.cwd(), seed=seed)
    if not isinstance(path_or_text, (str, os.PathLike)):
        raise InputError(f"path_or_text: a path or TOML text is required (got {type(path_or_text).__name__})")
    path = Path(path_or_text)
    return _make(read(path), str(path_or_text), path.resolve().parent, seed=seed)


def demo_study(name: str = "colony") -> StudyFile:
    """A built-in demo study (invented scenarios): ``"colony"``, ``"dormancy"`` or ``"pulsed"``.

    ``switchlaw demos`` lists them with a line each; ``switchlaw show-demo NAME`` prints one.
    """
    from ._main import DEMOS, _demo_text, demo_dir

    if name not in DEMOS:
        raise InputError(f"name: unknown demo {name!r} (valid: {', '.join(DEMOS)})")
    return _make(_demo_text(name), f"demo:{name}", demo_dir(), seed=None)
