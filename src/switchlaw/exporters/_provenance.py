"""Provenance of exported files: a hash of the canonical inputs and a metadata record."""

from __future__ import annotations

import hashlib
import json

import numpy as np

from .._errors import InputError
from .._units import TIME_SYMBOLS, TIME_UNITS  # noqa: F401  (re-exported for the formats)

#: Arrays of a law that enter its hash, in this order (name in the file, attribute of the law).
LAW_ARRAYS = (
    ("densities", "densities"),
    ("states", "states"),
    ("state_values", "state_values"),
    ("probability", "table"),
    ("state_probability", "state_probs"),
    ("beta", "betas"),
    ("information_bits", "information_bits"),
    ("expected_payoff", "expected_payoff"),
    ("converged", "converged"),
)

#: Units of every quantity written to the tables.
UNITS = {
    "density": "1",
    "state_value": "signal unit",
    "probability": "1",
    "state_probability": "1",
    "fraction": "1",
    "beta": "nats per payoff unit",
    "information_bits": "bit",
    "expected_payoff": "payoff unit",
    "converged": "1",
    "step_probability": "1",
}

#: The same quantities in netCDF (CF conventions): ``units`` only where UDUNITS-2 parses it;
#: information is a number (``"1"``) whose unit, bit, the long name states; quantities in the
#: user's own units (payoff, signal) have no ``units`` and state them in the long name.
CF_UNITS = {
    "density": "1",
    "probability": "1",
    "state_probability": "1",
    "fraction": "1",
    "information_bits": "1",
    "step_probability": "1",
}

CAUTION = (
    "Research output about cell populations (a hypothesis), not a prediction for any patient; "
    "switchlaw is not a medical device."
)


def _update(digest, name: str, values) -> None:
    array = np.ascontiguousarray(np.asarray(values, dtype=float), dtype="<f8")
    digest.update(f"{name}:{','.join(str(n) for n in array.shape)}\n".encode())
    digest.update(array.tobytes())


def law_sha256(arrays: dict, phenotypes, objective: str, route: str, setting: float) -> str:
    """SHA-256 of a law's canonical inputs (hex).

    ``arrays`` maps the names of :data:`LAW_ARRAYS` to arrays. Each array, in that order,
    contributes the line ``name:shape`` (shape as comma-separated integers) in UTF-8 followed
    by its values as little-endian float64 in C order (booleans as 0.0/1.0, +inf as IEEE
    infinity); then the UTF-8 text ``phenotypes=<names joined by U+001F>``, ``objective=``,
    ``route=`` and ``setting=<repr of the float>``, each line ending in ``\\n``.
    """
    digest = hashlib.sha256()
    for name, _ in LAW_ARRAYS:
        _update(digest, name, arrays[name])
    text = (
        f"phenotypes={chr(31).join(phenotypes)}\nobjective={objective}\nroute={route}\n"
        f"setting={float(setting)!r}\n"
    )
    digest.update(text.encode())
    return digest.hexdigest()


def sha256_of_law(law) -> str:
    """:func:`law_sha256` of a :class:`SwitchingLaw`."""
    arrays = {name: getattr(law, attribute) for name, attribute in LAW_ARRAYS}
    return law_sha256(arrays, law.phenotypes, law.objective, law.route, law.setting)


def sha256_of_fit(fit) -> str:
    """SHA-256 of a :class:`FormulaFit`: kind, phenotype, densities, then each parameter."""
    digest = hashlib.sha256()
    digest.update(f"kind={fit.kind}\nphenotype={fit.phenotype}\nper_density={fit.per_density}\n".encode())
    _update(digest, "densities", fit.densities)
    for name in sorted(fit.parameters):
        _update(digest, name, fit.parameters[name])
    return digest.hexdigest()


def version() -> str:
    import switchlaw

    return switchlaw.__version__


def study_text(study) -> str:
    """The study as canonical JSON text (``"null"`` when none was given)."""
    try:
        return json.dumps(study, sort_keys=True, allow_nan=False)
    except (TypeError, ValueError) as error:
        raise InputError(f"`study` must be JSON-serialisable with finite numbers ({error})") from None


def law_metadata(law, study, digest: str) -> dict:
    """The provenance record shared by every table written from a law."""
    converged = bool(np.all(law.converged))
    made = f"{law.objective}, {law.route} = {float(law.setting)!r}"
    note = f"Written by switchlaw {version()} from a switching law ({made})."
    if not converged:
        failed = int(np.sum(~np.asarray(law.converged, dtype=bool)))
        note += f" NOT CONVERGED at {failed} of {law.densities.size} densities (exported on request)."
    return {
        "switchlaw_version": version(),
        "inputs_sha256": digest,
        "objective": law.objective,
        "route": law.route,
        "setting": float(law.setting),
        "converged": converged,
        "study": json.loads(study_text(study)),
        "note": note + " " + CAUTION,
    }
