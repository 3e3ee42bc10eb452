"""The exceptions prunebench raises, all rooted in one base class.

The command line turns any :class:`PrunebenchError` into a one-line message and
a non-zero exit code; anything else is a bug and keeps its traceback.
"""

from __future__ import annotations

__all__ = [
    "ConductError",
    "ConductStopped",
    "DatasetError",
    "EffectsError",
    "InvalidParameterError",
    "PrunebenchError",
    "QueryError",
    "RunnerError",
    "StatsError",
    "StoreError",
    "StudyError",
    "TrialTimeout",
    "WorkerLost",
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


class EffectsError(PrunebenchError):
    """The folds cannot answer the question asked."""

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


class ConductStopped(PrunebenchError):
    """A ``conduct`` stopped before its end: interrupted, or a worker process died.

    Every trial group finished before the stop is stored; running the same study
    again resumes.  The exit code follows the shell's convention for a signal
    (130 for SIGINT, 143 for SIGTERM) and is 1 for a lost worker.
    """

    def __init__(self, message: str, exit_code: int = 1) -> None:
        super().__init__(message)
        self.exit_code = exit_code


class RunnerError(PrunebenchError):
    """A runner cannot start as asked (a cluster that does not answer, Dask missing)."""

    exit_code = 2


class WorkerLost(PrunebenchError):
    """A worker process died while it ran a trial group; its pool cannot go on.

    ``conduct`` turns it into :class:`ConductStopped` with the count of stored trials.
    """
