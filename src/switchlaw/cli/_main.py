"""The ``switchlaw`` command line: check, run, demo, schema.

Heavy modules are imported inside the commands, so ``switchlaw --help`` starts at once.
"""

from __future__ import annotations

import argparse
import json
import sys
from importlib import resources
from pathlib import Path

DEMOS = {
    "colony": "A colony on a hexagonal lattice: divide or roam by occupied neighbours (invented).",
    "dormancy": "Microbes choosing growth or dormancy under a noisy stress cue (invented).",
    "pulsed": "Cells growing or tolerating a stress that comes in pulses, on schedules (invented).",
    "calibrated": "Fit beta and two payoff parameters to invented counts, then run at the fit (invented).",
}


def _version() -> str:
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version("switchlaw")
    except PackageNotFoundError:  # running from a source tree that is not installed
        return "unknown"


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="switchlaw",
        description="Derive phenotype switching laws from information theory and see what they do "
        "to a cell population. Research software, not a medical device.",
    )
    parser.add_argument("--version", action="version", version=f"switchlaw {_version()}")
    commands = parser.add_subparsers(dest="command", metavar="COMMAND")
    check = commands.add_parser("check", help="validate a study file")
    check.add_argument("study", help="path to a study file (TOML)")
    check.add_argument("--yes", action="store_true",
                       help="accept a study whose estimated time or memory is above the limit")
    for name, text in (("run", "run a whole study"), ("demo", "run a built-in study")):
        sub = commands.add_parser(name, help=text)
        if name == "run":
            sub.add_argument("study", help="path to a study file (TOML)")
        else:
            sub.add_argument("name", nargs="?", default="colony", help=f"one of: {', '.join(DEMOS)}")
        sub.add_argument("--out", required=True, help="output folder (must not exist unless --force)")
        sub.add_argument("--force", action="store_true",
                         help="replace an earlier switchlaw output folder (only the files it wrote)")
        sub.add_argument("--into-existing", action="store_true",
                         help="write into an existing folder switchlaw did not write (its files are kept)")
        sub.add_argument("--yes", action="store_true",
                         help="run even when the estimated time or memory is above the limit")
        sub.add_argument("--seed", type=int, default=None, help="override the study's seed")
        sub.add_argument("--quiet", action="store_true", help="no progress messages")
        sub.add_argument("--jobs", type=int, default=None, help="local processes for the beta scan")
        sub.add_argument("--scheduler", default=None,
                         help="Dask scheduler address (tcp://host:port) or scheduler file for the beta scan")
        sub.add_argument("--only", default=None, metavar="STAGE[,STAGE]",
                         help="run only these stages (law always runs, after calibration if the study has one): "
                         "calibration, law, population, regime_map, extinction, lattice, front, fluctuating, "
                         "schedule, sensitivity, variants")
        sub.add_argument("--skip", default=None, metavar="STAGE[,STAGE]", help="skip these stages")
    compare = commands.add_parser("compare", help="a side-by-side report of two finished runs")
    compare.add_argument("first", help="output folder of one run")
    compare.add_argument("second", help="output folder of another run")
    compare.add_argument("--out", required=True, help="output folder for report.html (must not exist unless --force)")
    compare.add_argument("--force", action="store_true", help="replace an earlier compare folder")
    demos = commands.add_parser("demos", help="list the built-in studies")
    demos.set_defaults()
    show = commands.add_parser("show-demo", help="print a built-in study file")
    show.add_argument("name", help=f"one of: {', '.join(DEMOS)}")
    schema = commands.add_parser("schema", help="print the JSON Schema of study files")
    schema.set_defaults()
    return parser


def _fail(message: str) -> int:
    print(f"switchlaw: error: {message}", file=sys.stderr)
    return 2


def _demo_text(name: str) -> str:
    if name not in DEMOS:
        raise KeyError(name)
    return resources.files("switchlaw.cli").joinpath("studies", f"{name}.toml").read_text(encoding="utf-8")


def demo_dir() -> Path:
    """The folder of the built-in studies (their data files are read from it)."""
    return Path(str(resources.files("switchlaw.cli").joinpath("studies")))


def _run(text: str, source: str, args, base_dir=None) -> int:
    from .._errors import InputError
    from ._outputs import OutputExists, OutputFolder, check_target
    from ._study import StudyError, load_text

    if args.seed is not None and args.seed < 0:
        return _fail(f"--seed must be >= 0 (got {args.seed})")
    if args.jobs is not None and args.jobs < 1:
        return _fail(f"--jobs must be >= 1 (got {args.jobs})")
    try:
        check_target(args.out)  # an unusable --out is refused before anything is computed
    except OutputExists as error:
        return _fail(str(error))
    try:
        study = load_text(text, source, seed=args.seed, base_dir=base_dir)
    except StudyError as error:
        for line in error.lines:
            print(line, file=sys.stderr)
        return 2
    from ._estimate import over_limit

    refused = over_limit(study)
    if refused and not args.yes:
        return _fail(f"{source}: {refused}; add --yes to run it anyway")
    from ._pipeline import run, write_outputs
    from ._stages import StageError, select

    try:
        stages = select(study, args.only, args.skip)
    except StageError as error:
        return _fail(str(error))
    try:
        with OutputFolder(args.out, force=args.force, into_existing=args.into_existing) as folder:
            results = run(study, text, quiet=args.quiet, jobs=args.jobs, scheduler=args.scheduler,
                          stages=stages, base_dir=base_dir)
            written = write_outputs(results, folder.work)
            folder.commit()
            out = folder.target
    except OutputExists as error:
        return _fail(str(error))
    except InputError as error:
        return _fail(f"{source}: {error}")
    if not args.quiet:
        print(f"wrote {out}/: " + ", ".join(written), file=sys.stderr)
        print("Research software, not a medical device; defer to clinical practice.", file=sys.stderr)
    return 0


def main(argv=None) -> int:
    args = _parser().parse_args(argv)
    if args.command is None:
        _parser().print_help()
        return 2
    if args.command == "check":
        from ._estimate import over_limit
        from ._study import StudyError, load

        try:
            study, _ = load(args.study)
        except StudyError as error:
            for line in error.lines:
                print(line, file=sys.stderr)
            return 2
        refused = over_limit(study)
        if refused and not args.yes:
            return _fail(f"{args.study}: {refused}; `run` needs --yes for it")
        print(f"{args.study}: ok ({study.study.title}; {len(study.study.phenotypes)} phenotypes)")
        return 0
    if args.command == "run":
        from ._study import StudyError, read

        try:
            text = read(args.study)
        except StudyError as error:
            print(error.lines[0], file=sys.stderr)
            return 2
        return _run(text, args.study, args, base_dir=Path(args.study).resolve().parent)
    if args.command == "demo":
        try:
            text = _demo_text(args.name)
        except KeyError:
            return _fail(f"unknown demo {args.name!r} (valid: {', '.join(DEMOS)})")
        return _run(text, f"demo:{args.name}", args, base_dir=demo_dir())
    if args.command == "compare":
        from ._compare import compare

        return compare(args.first, args.second, args.out, force=args.force)
    if args.command == "demos":
        for name, text in DEMOS.items():
            print(f"{name:10s} {text}")
        return 0
    if args.command == "show-demo":
        try:
            print(_demo_text(args.name), end="")
        except KeyError:
            return _fail(f"unknown demo {args.name!r} (valid: {', '.join(DEMOS)})")
        return 0
    if args.command == "schema":
        from ._study import json_schema

        print(json.dumps(json_schema(), indent=2))
        return 0
    return _fail(f"unknown command {args.command!r}")  # pragma: no cover - argparse guards this


if __name__ == "__main__":
    sys.exit(main())
