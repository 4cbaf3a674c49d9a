"""Old public names kept for one release, each use warned with a ``DeprecationWarning``."""

from __future__ import annotations

import functools
import warnings


def renamed_keyword(old: str, new: str, *, since: str = "0.2"):
    """Decorate a function whose argument ``old`` is now ``new``: ``old=`` still works, with a warning."""

    def decorate(function):
        @functools.wraps(function)
        def wrapper(*args, **kwargs):
            if old in kwargs:
                if new in kwargs:
                    from ._errors import InputError

                    raise InputError(f"give `{new}` only (`{old}` is its old name)")
                warnings.warn(f"`{old}=` is deprecated since {since}; use `{new}=`", DeprecationWarning, stacklevel=2)
                kwargs[new] = kwargs.pop(old)
            return function(*args, **kwargs)

        return wrapper

    return decorate


def renamed_attribute(module_name: str, renamed: dict[str, str], namespace: dict, *, since: str = "0.2"):
    """A PEP 562 ``__getattr__`` for a module whose names in ``renamed`` (old -> new) moved;
    ``namespace`` is the module's ``globals()``, which holds the new names.

    The old name returns the new object and warns each time (nothing is cached under it).
    """

    def __getattr__(name: str):
        if name in renamed:
            warnings.warn(f"`{module_name}.{name}` is deprecated since {since}; use `{renamed[name]}`",
                          DeprecationWarning, stacklevel=2)
            return namespace[renamed[name]]
        raise AttributeError(f"module {module_name!r} has no attribute {name!r}")

    return __getattr__
