"""Format ``json``: the whole law in one JSON document (schema: ``law.schema.json``)."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ._provenance import LAW_ARRAYS, law_metadata, sha256_of_law
from ._registry import Format, register
from ._tables import LAW_KIND, check_shape, dumps, from_json_values, header, law_arrays, law_dataset


def write(law, path: Path, *, study) -> tuple:
    digest = sha256_of_law(law)
    arrays = law_arrays(law)
    document = header(LAW_KIND, "json", law_metadata(law, study, digest), law.phenotypes, arrays,
                      [name for name, _ in LAW_ARRAYS])
    return {path: dumps(document)}, digest


def read(document: dict, path: Path):
    """The law dataset from a JSON law document."""
    arrays = {name: from_json_values(name, document[name]) for name, _ in LAW_ARRAYS}
    k, m, n = arrays["densities"].size, arrays["states"].size, len(document["phenotypes"])
    check_shape("probability", arrays["probability"], (k, m, n), path)
    check_shape("state_probability", arrays["state_probability"], (k, m), path)
    for name in ("beta", "information_bits", "expected_payoff", "converged"):
        check_shape(name, np.asarray(arrays[name]), (k,), path)
    return law_dataset(arrays, document["phenotypes"], document["metadata"])


FORMAT = register(Format(
    name="json",
    suffixes=(".json",),
    accepts=("SwitchingLaw",),
    options={"study": None},
    write=write,
    description="the law in one JSON document with its provenance (schema law.schema.json)",
))
