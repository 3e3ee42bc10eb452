"""The ``[decision]`` section of a study file, and what is read back from a stored study's text.

:func:`decision_of_text` and :func:`levels_of_text` read a study file's text as
``studies.study_text`` stores it, so :mod:`prunebench.results` can tell a stored
study's decision settings and factor levels without loading its data sets.
"""

from __future__ import annotations

import tomllib

from .exceptions import StudyError
from .selection import parse_rule
from .study_checker import _Checker, _number
from .trials import FACTORS
from .vocabulary import DEFAULT_METRIC, FAMILIES, default_margin, metric_names
from .vocabulary import FACTORS as _FACTOR_SPECS

__all__ = ["decision_of_text", "levels_of_text"]

_DECISION_KEYS = ("metric", "margin", "alpha")


def _decision_section(check: _Checker, doc: object, families) -> dict:
    """``[decision]``: the primary metric, its margin and alpha, per task family.

    ``metric`` and ``margin`` may be given for every family in ``[decision]`` or per
    family in ``[decision.classification]`` / ``[decision.regression]``; a margin is in
    its metric's units (a share of the unpruned loss for MSE and MAE) and defaults to
    the vocabulary's margin of the metric; ``alpha`` lies in (0, 0.5].
    """
    if not isinstance(doc, dict):
        raise check.fail("decision", "must be a table with metric, margin and alpha")
    for key, value in doc.items():
        if key in FAMILIES:
            if not isinstance(value, dict):
                raise check.fail(f"decision.{key}", "must be a table with metric and margin")
            for sub in value:
                if sub not in ("metric", "margin"):
                    raise check.fail(
                        f"decision.{key}.{sub}", "is not a decision key; use metric and margin"
                    )
        elif key not in _DECISION_KEYS:
            raise check.fail(
                f"decision.{key}",
                f"is not a decision key; the keys are {', '.join(_DECISION_KEYS)} "
                "and the tables [decision.classification], [decision.regression]",
            )
    alpha = doc.get("alpha", 0.05)
    if not _number(alpha) or not 0 < alpha <= 0.5:
        raise check.fail("decision.alpha", f"must be a number in (0, 0.5]; got {alpha!r}")
    for family in doc:
        if family in FAMILIES and family not in families:
            raise check.fail(f"decision.{family}", f"no {family} dataset in the study")
    out: dict = {"alpha": float(alpha), "metric": {}, "margin": {}}
    for family in families:
        own = doc.get(family, {})
        prefix = f"decision.{family}." if "metric" in own else "decision."
        metric = own.get("metric", doc.get("metric", DEFAULT_METRIC[family]))
        allowed = metric_names(family)
        if metric not in allowed:
            hint = (
                f"; with both tasks in one study give metric in [decision.{family}]"
                if len(families) > 1 and "metric" not in own
                else ""
            )
            raise check.fail(
                prefix + "metric",
                f"{metric!r} is not a {family} metric; use one of {', '.join(allowed)}{hint}",
            )
        key = f"decision.{family}.margin" if "margin" in own else "decision.margin"
        margin = own.get("margin", doc.get("margin"))
        if margin is None:
            margin = default_margin(metric)
        elif not _number(margin) or not margin > 0:
            raise check.fail(key, f"must be a number > 0 in {metric}'s units; got {margin!r}")
        out["metric"][family], out["margin"][family] = metric, float(margin)
    return out


def decision_of_text(text: str, families=FAMILIES, source: str = "<study>") -> dict:
    """The ``[decision]`` settings of a study file's text, defaults filled in.

    Parameters
    ----------
    text : str
        A study file's TOML text (as stored in ``studies.study_text``).
    families : iterable of str
        The task families whose metric and margin are wanted.
    source : str
        Name used in messages.

    Returns
    -------
    dict
        ``alpha`` (float), ``metric`` (family -> metric) and ``margin`` (family -> margin).

    Raises
    ------
    StudyError
        One line naming the key of a mistake.
    """
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as err:
        raise StudyError(f"{source}: not valid TOML: {err}") from None
    return _decision_section(_Checker(text, source), doc.get("decision", {}), list(families))


def levels_of_text(text: str, family: str) -> dict[str, list]:
    """One task family's factor levels in the study file's order (the first is the reference).

    The per-family table, else ``[factors]``, else the vocabulary's default; rules in
    their canonical spelling, ``"none"`` for an unlimited depth.  The text is assumed
    valid (it was checked when the study was conducted).

    Parameters
    ----------
    text : str
        A study file's TOML text.
    family : {"classification", "regression"}

    Returns
    -------
    dict
        Factor -> list of levels.
    """
    doc = tomllib.loads(text)
    if "search" in doc:
        return {}
    factors_doc = doc.get("factors", {})
    own = factors_doc.get(family, {})
    levels = {}
    for factor in FACTORS:
        value = own.get(factor, factors_doc.get(factor, [_FACTOR_SPECS[factor].default[family]]))
        value = value if isinstance(value, list) else [value]
        if factor == "rule":
            value = [parse_rule(v).name for v in value]
        levels[factor] = value
    return levels
