"""Format ``csv``: the law in long format, one row per density x state x phenotype, with a
JSON sidecar (``<path>.json``) holding units, provenance and the per-density quantities."""

from __future__ import annotations

import csv
import io
from pathlib import Path

import numpy as np

from .._errors import InputError
from ._provenance import law_metadata, sha256_of_law
from ._registry import Format, register
from ._tables import (
    LAW_KIND, dumps, from_json_values, header, law_arrays, law_dataset, number, state_text,
)

#: Per-density and per-state quantities kept in the sidecar (the CSV holds the rest).
SIDECAR_ARRAYS = ("densities", "states", "state_values", "beta", "information_bits",
                  "expected_payoff", "converged")


def sidecar_path(path: Path) -> Path:
    """Where the JSON sidecar of a CSV table lives: the CSV path with ``.json`` appended."""
    return path.with_name(path.name + ".json")


def value_columns(state_values: np.ndarray) -> list:
    if state_values.ndim == 1:
        return ["state_value"]
    return [f"state_value_{j}" for j in range(state_values.shape[1])]


def long_table(law, tail_columns: list, tail_rows) -> tuple[list, str]:
    """A long-format CSV of ``law``: density, state and state values lead every row.

    ``tail_rows(k, y)`` yields the rest of each row at density index ``k`` and state ``y``.
    Returns the column names and the text.
    """
    values = np.asarray(law.state_values, dtype=float)
    columns = ["density", "state", *value_columns(values), *tail_columns]
    text = io.StringIO()
    writer = csv.writer(text, lineterminator="\n")
    writer.writerow(columns)
    per_state = values.reshape(values.shape[0], -1)
    for k, rho in enumerate(law.densities):
        for y, state in enumerate(law.states):
            fixed = [number(rho), state_text(state), *(number(v) for v in per_state[y])]
            for tail in tail_rows(k, y):
                writer.writerow([*fixed, *tail])
    return columns, text.getvalue()


def write(law, path: Path, *, study) -> tuple:
    digest = sha256_of_law(law)
    arrays = law_arrays(law)
    columns, text = long_table(
        law, ["phenotype", "probability", "state_probability"],
        lambda k, y: ([name, number(law.table[k, y, x]), number(law.state_probs[k, y])]
                      for x, name in enumerate(law.phenotypes)),
    )
    sidecar = header(LAW_KIND, "csv", law_metadata(law, study, digest), law.phenotypes, arrays,
                     SIDECAR_ARRAYS)
    sidecar["csv"] = {"file": path.name, "columns": columns,
                      "rows": "one per density x state x phenotype"}
    return {path: text.encode(), sidecar_path(path): dumps(sidecar)}, digest


def rows(path: Path, columns: list) -> list:
    """The data rows of a CSV table, after checking its header."""
    try:
        with open(path, newline="", encoding="utf-8") as stream:
            reader = csv.reader(stream)
            found = next(reader, None)
            if found != columns:
                raise InputError(f"`path` {str(path)!r} must have the columns {columns} (got {found})")
            return list(reader)
    except FileNotFoundError:
        raise InputError(f"`path` {str(path)!r} does not exist") from None


def index(values, path: Path, name: str) -> dict:
    lookup = {}
    for i, value in enumerate(values):
        lookup[value] = i
    if len(lookup) != len(values):
        raise InputError(f"`path` {str(path)!r}: the sidecar's {name} must be distinct")
    return lookup


def parse_state(text: str, states: np.ndarray):
    return int(text) if np.issubdtype(states.dtype, np.integer) else float(text)


def fill(path: Path, cells, shape: tuple, what: str) -> np.ndarray:
    """An array of ``shape`` from ``(index, value)`` pairs, each cell given exactly once."""
    array = np.full(shape, np.nan)
    seen = np.zeros(shape, dtype=bool)
    for where, value in cells:
        if seen[where] and array[where] != value:
            raise InputError(f"`path` {str(path)!r}: {what} at {where} is given twice, differently")
        array[where] = value
        seen[where] = True
    if not seen.all():
        where = tuple(int(i) for i in np.argwhere(~seen)[0])
        raise InputError(f"`path` {str(path)!r}: {what} at {where} is missing")
    return array


def indexed_rows(path: Path, sidecar: dict, arrays: dict, *, phenotype_columns: int, numbers: int):
    """Rows of a long-format table as ``(density index, state index, phenotype indices, values)``.

    Shared by every long CSV table: the first two columns are density and state, then
    ``phenotype_columns`` phenotype names, and the last ``numbers`` columns are numbers. Returns
    the list of rows and the sizes ``(densities, states, phenotypes)``.
    """
    columns = sidecar["csv"]["columns"]
    densities = index(arrays["densities"].tolist(), path, "densities")
    states = index(arrays["states"].tolist(), path, "states")
    names = index(sidecar["phenotypes"], path, "phenotypes")
    width = len(columns)
    first = width - numbers - phenotype_columns
    out = []
    try:
        for row in rows(path, columns):
            if len(row) != width:
                raise InputError(f"`path` {str(path)!r}: every row must have {width} fields (got {row})")
            out.append((
                densities[float(row[0])],
                states[parse_state(row[1], arrays["states"])],
                tuple(names[row[j]] for j in range(first, first + phenotype_columns)),
                tuple(float(row[j]) for j in range(width - numbers, width)),
            ))
    except (KeyError, ValueError) as error:
        raise InputError(f"`path` {str(path)!r}: a row names a value not in the sidecar ({error})") from None
    return out, (len(densities), len(states), len(names))


def read(path: Path, sidecar: dict):
    """The law dataset from a CSV table and its sidecar."""
    arrays = {name: from_json_values(name, sidecar[name]) for name in SIDECAR_ARRAYS}
    phenotypes = sidecar["phenotypes"]
    found, (k, m, n) = indexed_rows(path, sidecar, arrays, phenotype_columns=1, numbers=2)
    table = [((i, y, x), values[0]) for i, y, (x,), values in found]
    state_probs = [((i, y), values[1]) for i, y, _, values in found]
    arrays["probability"] = fill(path, table, (k, m, n), "probability")
    arrays["state_probability"] = fill(path, state_probs, (k, m), "state_probability")
    return law_dataset(arrays, phenotypes, sidecar["metadata"])


FORMAT = register(Format(
    name="csv",
    suffixes=(".csv",),
    accepts=("SwitchingLaw",),
    options={"study": None},
    write=write,
    description="long-format CSV (density x state x phenotype) with a JSON sidecar",
))
