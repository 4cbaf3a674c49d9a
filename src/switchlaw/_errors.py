"""Exception types raised at switchlaw's public boundary."""

__all__ = ["InputError", "InfeasibleError"]


class InputError(ValueError):
    """An argument breaks a documented rule.

    The message names the argument, the rule and the value received, on one line.
    """


class InfeasibleError(InputError):
    """The requested problem has no solution (for example a budget beyond what is possible)."""


# Shown as ``switchlaw.InputError`` in tracebacks: the public name.
InputError.__module__ = InfeasibleError.__module__ = "switchlaw"
