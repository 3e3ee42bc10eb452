"""The exceptions prunebench raises, all rooted in one base class.

The command line turns any :class:`PrunebenchError` into a one-line message and
a non-zero exit code; anything else is a bug and keeps its traceback.
"""

from __future__ import annotations

__all__ = [
    "ConductError",
    "DatasetError",
    "InvalidParameterError",
    "PrunebenchError",
    "QueryError",
    "StatsError",
    "StoreError",
    "StudyError",
    "TrialTimeout",
    "parameter_error",
]


class PrunebenchError(Exception):
    """Base class of every error prunebench raises on purpose."""

    exit_code = 1


class InvalidParameterError(PrunebenchError, ValueError):
    """A parameter has a value outside its constraints.

    Subclasses :class:`ValueError` so scikit-learn's estimator checks, which
    expect ``ValueError`` for bad parameters, treat it as such.
    """

    exit_code = 2


class StudyError(PrunebenchError):
    """A study file cannot be used as written."""

    exit_code = 2


class DatasetError(PrunebenchError):
    """A data set is unknown, or its data cannot be used."""

    exit_code = 2


class StoreError(PrunebenchError):
    """The results database cannot be used as asked."""

    exit_code = 1


class StatsError(PrunebenchError):
    """The stored results cannot answer the question asked."""

    exit_code = 2


class QueryError(PrunebenchError):
    """A query was refused or failed."""

    exit_code = 2


class ConductError(PrunebenchError):
    """A study cannot be conducted as asked."""

    exit_code = 2


class TrialTimeout(PrunebenchError):
    """A trial group ran past the study's ``time_limit``."""


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
