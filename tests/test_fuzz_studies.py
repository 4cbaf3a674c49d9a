"""Fuzzing study files and public arguments with hypothesis.

The rule checked (issue 14's contract, common practice for input validation, no source):
every outcome is a result or a one-line error naming the key path (or the argument), never
a traceback or a hang, and a failing ``run`` writes nothing.
"""

import re
import signal
import tempfile
from contextlib import contextmanager
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import switchlaw as sl
from switchlaw.cli._estimate import over_limit
from switchlaw.cli._main import main
from switchlaw.cli._study import StudyError, load_text

ROOT = Path(__file__).resolve().parents[1]
STUDIES = [(ROOT / "src" / "switchlaw" / "cli" / "studies" / f"{n}.toml").read_text(encoding="utf-8")
           for n in ("colony", "dormancy")]
#: Seconds one case may take (validation only computes a few environments).
LIMIT = 20


@contextmanager
def time_limit(seconds):
    def expired(*args):
        raise TimeoutError(f"a case took more than {seconds} s")

    previous = signal.signal(signal.SIGALRM, expired)
    signal.alarm(seconds)
    try:
        yield
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, previous)


HOSTILE = st.one_of(
    st.integers(min_value=-(2**70), max_value=2**70).map(str),
    st.floats(allow_nan=True, allow_infinity=True).map(
        lambda x: "nan" if x != x else ("inf" if x == float("inf") else "-inf" if x == float("-inf") else repr(x))),
    st.sampled_from(["1e308", "-1e308", "5e-324", "0", "-0.0", "true", "[]", "{}", "[1, 2]", '""',
                     '"<script>alert(1)</script>"', '"\\u0000"', '"y / 0"', '"exp(exp(exp(y)))"',
                     '"1 / (density - 0.5)"', '"__import__(\'os\')"', '"y" * 3', "{ start = 0, stop = 1, points = 3 }",
                     '["a", "a"]', '[""]', "{ kind = \"poisson\", gain = 1e9 }", "[[[[[]]]]]"]),
    st.text(alphabet=st.characters(blacklist_categories=("Cs",)), max_size=20).map(lambda t: '"' + t.replace("\\", "\\\\").replace('"', '\\"') + '"'),
)
ASSIGNMENT = re.compile(r"^(\s*[\w\"-]+\s*=\s*)(.+)$")


@st.composite
def mutated_study(draw):
    text = draw(st.sampled_from(STUDIES))
    lines = text.splitlines()
    places = [i for i, line in enumerate(lines) if ASSIGNMENT.match(line)]
    for _ in range(draw(st.integers(1, 3))):
        i = draw(st.sampled_from(places))
        head = ASSIGNMENT.match(lines[i]).group(1)
        lines[i] = head + draw(HOSTILE)
    if draw(st.booleans()):
        lines.insert(draw(st.integers(0, len(lines))), draw(st.sampled_from(
            ["[study", "x = 1", "[extra]", "lattice_sites = 1000000000000", "bits = 100.0", "tau = 1e-300",
             "crowding = { divide = 1e308 }", "receptor = { kind = \"gaussian\", sd = 0.0 }"])))
    return "\n".join(lines) + "\n"


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(mutated_study())
def test_every_study_file_gives_a_result_or_one_line_errors_with_key_paths(text):
    with time_limit(LIMIT):
        try:
            study = load_text(text, "study.toml")
        except StudyError as error:
            assert error.lines
            for line in error.lines:
                assert "\n" not in line and line.startswith("study.toml: ")
                assert re.match(r"^study\.toml: (\(file\)|\(top level\)|[\w.\[\]\"<>/ -]+): \S", line), line
            failed = True
        else:
            over_limit(study)  # the estimate takes any valid study
            failed = False
    if failed:
        # The command line agrees and writes nothing (checked in a folder of its own).
        with tempfile.TemporaryDirectory() as folder, time_limit(LIMIT):
            path = Path(folder) / "study.toml"
            path.write_text(text, encoding="utf-8")
            assert main(["check", str(path)]) == 2
            assert main(["run", str(path), "--out", str(Path(folder) / "out"), "--quiet"]) == 2
            assert [p.name for p in Path(folder).iterdir()] == ["study.toml"]


ARGUMENT = st.one_of(
    st.none(), st.booleans(), st.integers(-10, 10**12), st.floats(allow_nan=True, allow_infinity=True),
    st.text(max_size=5), st.lists(st.floats(allow_nan=True), max_size=3),
)


@settings(max_examples=40, deadline=None)
@given(neighbours=ARGUMENT, density=ARGUMENT, lattice_sites=ARGUMENT, names=st.one_of(
    st.lists(st.text(max_size=70), min_size=2, max_size=2), st.text(max_size=3), st.none()))
def test_public_arguments_give_a_result_or_an_input_error(neighbours, density, lattice_sites, names):
    with time_limit(LIMIT):
        try:
            env = sl.occupancy(neighbours, density, lattice_sites=lattice_sites)
        except sl.InputError as error:
            assert "\n" not in str(error) and "`" in str(error)  # names the argument
        else:
            assert abs(env.probs.sum() - 1.0) < 1e-9
        try:
            law = sl.derive_law({"a": sl.Linear(0.0, 1.0), "b": sl.Linear(1.0, -1.0)},
                                lambda rho: sl.occupancy(3, rho), densities=[0.2, 0.6], beta=2.0,
                                phenotypes=names)
        except sl.InputError as error:
            assert "\n" not in str(error) and "`" in str(error)
        else:
            assert len(set(law.phenotypes)) == 2


@pytest.mark.parametrize("names, message", [
    (["a", "a"], "`phenotypes` must be distinct; 'a' appears twice"),
    (["a", ""], "`phenotypes[1]` must not be empty"),
    (["a", "b\tc"], "`phenotypes[1]` must be printable text"),
    (["a", "b" * 65], "`phenotypes[1]` has at most 64 characters (got 65)"),
    ("ab", "`phenotypes` must be a sequence of names, not one string"),
])
def test_phenotype_names_are_checked_at_every_entry_point(names, message):
    payoff = {"a": sl.Linear(0.0, 1.0), "b": sl.Linear(1.0, -1.0)}
    with pytest.raises(sl.InputError, match=re.escape(message)):
        sl.derive_law(payoff, lambda rho: sl.occupancy(3, rho), densities=[0.2], beta=1.0, phenotypes=names)
    with pytest.raises(sl.InputError, match=re.escape(message)):
        sl.MeanField(payoff, lambda rho: sl.occupancy(3, rho), division=[1.0, 0.0], death=[0.2, 0.2],
                     phenotypes=names)
