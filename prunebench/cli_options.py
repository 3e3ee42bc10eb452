"""What the ``prunebench`` commands share: options, error reporting, reading and printing.

The option decorators are declared once here and stacked by :mod:`prunebench.cli`;
:func:`_reports_errors` turns prunebench's own errors into one line and an exit code,
with library keywords shown as this command line's flags (:func:`_as_flags`).
"""

from __future__ import annotations

import functools
import re
import sys

import click

from .exceptions import PrunebenchError
from .vocabulary import (
    CLASSIFICATION,
    DEFAULT_METRIC,
    REGRESSION,
    metric_names,
)

#: keyword parameters of the library -> the options that set them here
FLAGS = {
    "study": "--study",
    "database": "--db",
    "metric": "--metric",
    "alpha": "--alpha",
    "margin": "--margin",
    "fmt": "--format",
    "out": "--out",
}


def _per_family(levels: dict) -> str:
    """``"gini / squared_error"``: a family's default, classification first."""
    return f"{levels[CLASSIFICATION]} / {levels[REGRESSION]}"


#: boolean keyword parameters -> the flags that set them (``overwrite=True`` is ``--overwrite``)
SWITCHES = {"overwrite": "--overwrite"}


def _as_flags(
    message: str, commands, options: dict[str, str] | None = None, running: str = ""
) -> str:
    """A library message with its ``keyword=`` names written as this command line's flags.

    ``commands`` are the command names: a parameter error whose owner is one of them
    names an option of that command.  ``options`` maps the keywords of the command
    ``running`` to its flags: a library function's parameter that one of them set (``rule`` of the
    estimator behind ``demo --rule``) is named as that option; any other stays as the
    library's parameter.
    """
    switches = r"\b(" + "|".join(SWITCHES) + r")=True\b"
    message = re.sub(switches, lambda m: SWITCHES[m.group(1)], message)
    pattern = r"\b(" + "|".join(FLAGS) + r")=(?=\.\.\.|\S)"
    message = re.sub(pattern, lambda m: FLAGS[m.group(1)] + " ", message)
    # the one parameter-error template names a keyword: from here it is an option
    options = options or {}

    def as_option(m: re.Match) -> str:
        keyword, owner = m.group(1), m.group(2)
        if owner in commands and keyword in FLAGS:
            return f"The '{FLAGS[keyword]}' option of prunebench {owner}"
        if keyword in options and owner not in commands:
            return f"The '{options[keyword]}' option of prunebench {running}".rstrip()
        return m.group(0)  # a library function's own parameter

    return re.sub(r"^The '(\w+)' parameter of (\w+)", as_option, message)


def _options_of(context) -> dict[str, str]:
    """The running command's keywords and their flags (``{"rule": "--rule"}``)."""
    if context is None:
        return {}
    return {
        p.name: max(p.opts, key=len)
        for p in context.command.params
        if isinstance(p, click.Option) and p.name
    }


def _check_decision_flags(name: str, kwargs: dict) -> None:
    """Refuse a command's ``--margin`` or ``--alpha`` out of range before anything is read."""
    margin, alpha = kwargs.get("margin"), kwargs.get("alpha")
    if margin is None and alpha is None:
        return
    from .effects import check_decision

    check_decision(name, margin, 0.05 if alpha is None else alpha)


def _reports_errors(command):
    """Turn prunebench's own errors into one line on stderr and an exit code."""

    @functools.wraps(command)
    def run(*args, **kwargs):
        context = click.get_current_context(silent=True)
        try:
            _check_decision_flags(context.info_name if context else command.__name__, kwargs)
            return command(*args, **kwargs)
        except PrunebenchError as err:
            group = context.find_root().command if context is not None else None
            commands = getattr(group, "commands", {})
            running = context.info_name if context is not None else ""
            message = _as_flags(str(err), commands, _options_of(context), running)
            click.echo(f"error: {message}", err=True)
            sys.exit(err.exit_code)

    return run


# ---- options shared by several commands, declared once -----------------------------------

_DB_HELP = "The results database, or the study file that names it."
_db_option = click.option(
    "--db",
    "database",
    required=True,
    type=click.Path(dir_okay=False),
    help=_DB_HELP,
)
_study_option = click.option(
    "--study", default=None, help="Study name, when the database holds several."
)
_metric_option = click.option(
    "--metric",
    default=None,
    help=f"{', '.join(metric_names(CLASSIFICATION))} (classification) or "
    f"{', '.join(metric_names(REGRESSION))} (regression). "
    f"Default: {_per_family(DEFAULT_METRIC)}.",
)
_alpha_option = click.option("--alpha", default=0.05, show_default=True, help="Significance level.")
_json_option = click.option("--json", "as_json", is_flag=True, help="Print JSON.")
_csv_option = click.option("--csv", "as_csv", is_flag=True, help="Print CSV.")
_study_file_argument = click.argument("study_file", type=click.Path(dir_okay=False))


def _reads_database(command):
    """Read the database a study file names when ``--db`` (or the argument) is a study file."""

    @functools.wraps(command)
    @_reports_errors
    def run(*args, database=None, source=None, **kwargs):
        from .exceptions import QueryError
        from .query import results_path

        given = {results_path(p) for p in (database, source) if p is not None}
        if len(given) > 1:
            raise QueryError(f"give one results database, not {source} and database={database}")
        if not given:
            name = click.get_current_context().info_name
            raise QueryError(
                f"name the results database or its study file: prunebench {name} FILE, "
                "or database=FILE"
            )
        return command(*args, database=given.pop(), **kwargs)

    return run


def _results_options(command):
    """``[DB_OR_STUDY]``, ``--db`` and ``--study``: the options of every command over results."""
    argument = click.argument(
        "source", required=False, metavar="[DB_OR_STUDY]", type=click.Path(dir_okay=False)
    )
    db = click.option(
        "--db",
        "database",
        default=None,
        type=click.Path(dir_okay=False),
        help=_DB_HELP + " Also accepted as the first argument.",
    )
    return argument(db(_study_option(_reads_database(command))))


def _output_options(command):
    """``--json`` and ``--csv``."""
    return _json_option(_csv_option(command))


def _emit(frame, as_json: bool, as_csv: bool) -> bool:
    """Print a frame as JSON or CSV if asked; True if printed."""
    import json

    if as_json and as_csv:
        raise click.UsageError("give --json or --csv, not both")
    if as_json:
        # not pandas' to_json, which keeps 10 decimals (a p-value of 1e-13 becomes 0.0):
        # every float whole, as the CSV writes it; missing values (NaN, NA) as null
        cells = frame.astype(object).where(frame.notna(), None)
        click.echo(json.dumps(_json_ready(cells.to_dict("records")), indent=2))
        return True
    if as_csv:
        click.echo(frame.to_csv(index=False), nl=False)
        return True
    return False


def _fold_rows(database: str, study: str | None, metric: dict):
    """The study's folds with the metric columns of ``metric`` (family -> metric) alone."""
    from .tables import open_results

    return open_results(database, study).fold_rows(metric.values())


_decision_alpha = click.option(
    "--alpha",
    type=float,
    default=None,
    help="Significance level in (0, 0.5]. Default: the study's [decision] alpha, else 0.05.",
)
_decision_margin = click.option(
    "--margin",
    type=float,
    default=None,
    help="Practical-equivalence margin in the metric's units (a share of the unpruned "
    "loss for mse and mae). Default: the study's [decision] margin, else the metric's "
    "(0.01 error, 0.02 log_loss, 1% of the unpruned mse).",
)
_decision_metric = click.option(
    "--metric",
    default=None,
    help=f"{', '.join(metric_names(CLASSIFICATION))} (classification) or "
    f"{', '.join(metric_names(REGRESSION))} (regression). "
    f"Default: the study's [decision] metric, else {_per_family(DEFAULT_METRIC)}.",
)


def _decision_options(command):
    """``--metric``, ``--margin`` and ``--alpha``: each overrides the study's ``[decision]``."""
    return _decision_metric(_decision_margin(_decision_alpha(command)))


def _settings(database: str, study: str | None, metric, margin, alpha) -> dict:
    from .tables import open_results

    return open_results(database, study).decision(metric, margin, alpha)


def _json_ready(records):
    from .snippets import plain_json

    return plain_json(records)
