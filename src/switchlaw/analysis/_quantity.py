"""Labels of scanned parameters and outputs: long names, units and dimension names."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping

from .._errors import InputError


@dataclass(frozen=True, eq=False)
class Quantity:
    """How one parameter or output of a scan is labelled in the result.

    Parameters
    ----------
    long_name : str
        Human-readable name (the netCDF ``long_name`` attribute).
    units : str, optional
        Units (the ``units`` attribute); ``"1"`` for dimensionless numbers.
    dims : tuple of str
        Names of an array output's own dimensions (default ``{name}_dim_0``, ...).
    coords : mapping, optional
        ``dimension name -> labels`` for those dimensions (e.g. phenotype names).
    """

    long_name: str
    units: str | None = None
    dims: tuple = ()
    coords: Mapping | None = None

    def attrs(self) -> dict:
        found = {"long_name": self.long_name}
        if self.units is not None:
            found["units"] = self.units
        return found


#: Labels of the parameters switchlaw models know by name.
KNOWN = {
    "beta": Quantity("sensitivity beta", "nats per payoff unit"),
    "cost_per_bit": Quantity("sensing cost per bit", "payoff unit per bit"),
    "death_scale": Quantity("factor on every death rate", "1"),
    "division_scale": Quantity("factor on every division rate", "1"),
    "tau": Quantity("decision timescale", "time unit"),
    "density": Quantity("population density", "1"),
}


def as_labels(labels, name: str = "labels") -> dict:
    """A clean ``name -> Quantity`` dict; mappings of keyword values are accepted too."""
    if labels is None:
        return {}
    if not isinstance(labels, Mapping):
        raise InputError(f"`{name}` must map names to Quantity objects (got {type(labels).__name__})")
    clean = {}
    for key, value in labels.items():
        if isinstance(value, Mapping):
            try:
                value = Quantity(**value)
            except TypeError as exc:
                raise InputError(f"`{name}[{key!r}]`: {exc}") from None
        if not isinstance(value, Quantity):
            raise InputError(
                f"`{name}[{key!r}]` must be a Quantity or a mapping of its fields "
                f"(got {type(value).__name__})"
            )
        clean[str(key)] = value
    return clean


def label_for(name: str, labels: dict) -> Quantity:
    """The label a caller gave, else the known one, else the bare name."""
    if name in labels:
        return labels[name]
    return KNOWN.get(name, Quantity(name))
