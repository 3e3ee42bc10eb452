"""The exceptions prunebench raises, all rooted in one base class.

The command line turns any :class:`PrunebenchError` into a one-line message and
a non-zero exit code; anything else is a bug and keeps its traceback.
"""

from __future__ import annotations

__all__ = ["PrunebenchError", "InvalidParameterError"]


class PrunebenchError(Exception):
    """Base class of every error prunebench raises on purpose."""

    exit_code = 1


class InvalidParameterError(PrunebenchError, ValueError):
    """A parameter has a value outside its constraints.

    Subclasses :class:`ValueError` so scikit-learn's estimator checks, which
    expect ``ValueError`` for bad parameters, treat it as such.
    """

    exit_code = 2


def parameter_error(name: str, owner: str, expected: str, got: object) -> InvalidParameterError:
    """Build the one message template used for every bad parameter.

    Parameters
    ----------
    name : str
        The parameter's name.
    owner : str
        The function or class it belongs to.
    expected : str
        What the parameter must be, in words.
    got : object
        The offending value.

    Returns
    -------
    InvalidParameterError
        The error, ready to raise.
    """
    return InvalidParameterError(
        f"The {name!r} parameter of {owner} must be {expected}. Got {got!r} instead."
    )
