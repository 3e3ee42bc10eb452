"""One self-contained HTML report of a study: the decision first, then the evidence.

The page opens with a decision box per task family (the recommended default in one
sentence, how confident the rule is, the leaves it saves, the code to paste), then
the caution, the factor table and its figure, every figure per task family, and the
long tables (sortable and filterable by a few lines of the page's own script).
Everything is embedded (figures as base64 PNG, styles and script inline), so the
file opens offline and can be mailed or archived as it is.
"""

from __future__ import annotations

import contextlib
import html
from pathlib import Path

import pandas as pd

from ._version import __version__
from .exceptions import InvalidParameterError, parameter_error
from .plots import (
    decision_inputs,
    family_figures,
    own_data,
    study_levels,
)
from .ranks import ranking
from .report_decision import _decision_box, _factor_section, _undecided_box
from .report_html import _SCRIPT, _STYLE, _figure, _filterable, _missing, _p, _table, format_number
from .results import decision_settings, load_folds, study_overview
from .snippets import CAUTION, caution_for, long_label
from .stats import comparison
from .store import ResultStore, utc_now
from .vocabulary import DEFAULT_METRIC, Configuration

__all__ = [
    "CAUTION",
    "build_report",
    "decision_inputs",
    "format_number",
    "own_data",
    "render_report",
    "report_inputs",
    "study_levels",
    "write_report",
]


# ---- reading and computing ---------------------------------------------------------------


def report_inputs(
    store: ResultStore,
    study: str | None = None,
    metric: str | None = None,
    margin: float | None = None,
    alpha: float | None = None,
) -> dict:
    """Everything a report shows, read through :mod:`prunebench.results` and computed.

    Parameters
    ----------
    store : ResultStore
        The results database, open for reading.
    study : str, optional
        Study name, when the database holds several.
    metric : str, optional
        The primary metric (default: the study's ``[decision]`` metric, else error / mse).
    margin : float, optional
        The practical-equivalence margin (default: the study's, else the metric's).
    alpha : float, optional
        The significance level (default: the study's, else 0.05).

    Returns
    -------
    dict
        :func:`prunebench.results.study_overview`'s entries, :func:`decision_inputs`'
        entries, plus ``rankings``, ``comparison`` and ``figures`` (family -> name ->
        Figure).
    """
    overview = study_overview(store, study)
    name = overview["info"]["name"]
    settings = decision_settings(store, name, metric, margin, alpha)
    # the metrics the report shows: the study's primary ones, and the default ones of the
    # ranking and comparison sections
    shown = {*settings["metric"].values(), *DEFAULT_METRIC.values()}
    folds = load_folds(store, name, shown)
    decided = decision_inputs(
        store, folds, name, settings["metric"], settings["margin"], settings["alpha"]
    )
    return {
        **overview,
        **decided,
        "rankings": ranking(folds),
        "comparison": comparison(folds),
        "figures": family_figures(store, folds, decided),
    }


def build_report(store: ResultStore, study: str | None = None, **decision) -> str:
    """The report of a study as one HTML string.

    Parameters
    ----------
    store : ResultStore
    study : str, optional
        Study name, when the database holds several.
    **decision
        ``metric``, ``margin``, ``alpha`` (see :func:`report_inputs`).

    Returns
    -------
    str
    """
    return render_report(report_inputs(store, study, **decision))


# ---- rendering ---------------------------------------------------------------------------

_SECTIONS = [
    ("decision", "Decision"),
    ("factors", "Factor effects"),
    ("figures", "Figures"),
    ("key", "Key to short labels"),
    ("ranking", "Ranking overview"),
    ("comparison", "Pruned against unpruned"),
    ("datasets", "Data sets"),
    ("failed", "Failed trials"),
    ("study-file", "Study file"),
    ("environment", "Environment"),
]


def render_report(inputs: dict) -> str:
    """The HTML of a report from :func:`report_inputs` (no reading, no statistics)."""
    info, recs = inputs["info"], inputs["recommendations"]
    short = _short_labels(inputs)
    parts = [
        _opening(info, inputs["counts"]),
        '<nav class="contents"><b>Contents:</b> '
        + "".join(f'<a href="#{a}">{t}</a>' for a, t in _SECTIONS)
        + "</nav>",
        '<h2 id="decision">Decision</h2>',
        *(_decision_box(r) for r in recs),
        *(
            _undecided_box(family, problem, inputs.get("family_counts", {}).get(family))
            for family, problem in inputs.get("problems", {}).items()
        ),
        f'<p class="caution"><b>Caution.</b> {html.escape(caution_for(inputs["own_data"]))}</p>',
        '<h2 id="factors">Factor effects</h2>',
        _factor_section(inputs["effects"], inputs["figures"]),
        '<h2 id="figures">Figures</h2>',
        _figures(inputs["figures"]),
        '<h2 id="key">Key to short labels</h2>',
        _key(short),
        '<h2 id="ranking">Ranking overview</h2>',
        *map(_ranked, inputs["rankings"]),
        '<h2 id="comparison">Pruned against unpruned, per data set and configuration</h2>',
        _comparison(inputs["comparison"]),
        '<h2 id="datasets">Data sets</h2>'
        + _table(
            inputs["datasets"],
            left=("name", "task", "source", "licence"),
            wrap=("source", "licence"),
        ),
        _failed(inputs["failed"]),
        '<h2 id="study-file">Study file</h2><pre>' + html.escape(info["study_text"]) + "</pre>",
        '<h2 id="environment">Environment</h2>'
        + _table(
            inputs["environments"],
            left=tuple(inputs["environments"].columns),
            wrap=("platform",),
        ),
        f"</main><script>{_SCRIPT}</script></body></html>",
    ]
    return "".join(parts)


def _short_labels(inputs: dict) -> dict[str, str]:
    """Every short label a figure may show -> the configuration written out."""
    out = {}
    for r in inputs["rankings"]:
        for config in r["table"]["config"]:
            c = Configuration.of(config)
            out[c.label()] = long_label(c)
    return dict(sorted(out.items()))


def _opening(info: dict, counts: dict) -> str:
    return (
        f'<!DOCTYPE html><html lang="en"><head><meta charset="utf-8">'
        f"<title>prunebench report: {html.escape(info['name'])}</title>"
        f"<style>{_STYLE}</style></head><body>"
        f"<header><h1>Study {html.escape(info['name'])}</h1>"
        f"<div>{html.escape(info['description'])}</div>"
        f"<div style='font-size:13px;margin-top:4px'>Seed {info['seed']}; outer CV "
        f"{info['outer_repeats']} repeats × {info['outer_folds']} folds; trials done "
        f"{counts.get('done', 0)}, failed {counts.get('failed', 0)}, pending "
        f"{counts.get('pending', 0)}. Report made {utc_now()} by prunebench "
        f"{__version__}.</div></header><main>"
    )


def _figures(figures: dict) -> str:
    parts = []
    for family, figs in figures.items():
        parts.append(f'<h3 id="figures-{family}">{family.capitalize()}</h3>')
        parts += [
            _figure(f"{family}_{name}", name, fig)
            for name, fig in figs.items()
            if name != "factor_effects"
        ]
        if "critical_difference" not in figs:
            parts.append(
                "<p>More than 40 configurations: the critical-difference diagram would be "
                "unreadable; the factor-effects figure above answers the same question.</p>"
            )
    return "".join(parts)


def _key(short: dict[str, str]) -> str:
    frame = pd.DataFrame({"short label": list(short), "configuration": list(short.values())})
    return (
        "<p>Figures name configurations by short labels: criterion (entr = entropy), "
        "d = depth cap, l = smallest leaf, k = inner folds, the rule, the pruning risk "
        "(err = error).</p>"
        + _filterable(
            _table(frame, left=("short label", "configuration"), table_id="key", sortable=True),
            "key",
            "labels",
        )
    )


def _ranked(r: dict) -> str:
    ranked = r
    f = ranked["friedman"]
    metric = ranked["metric"]
    if f:
        test = (
            f"Friedman χ² = {f['chi2']:.2f} (p = {f['p_chi2']:.3g}), Iman–Davenport F = "
            f"{f['ff']:.2f} (p = {f['p_ff']:.3g}), Nemenyi critical difference "
            f"{ranked['cd']:.2f} ranks."
        )
        if f["p_ff"] >= 0.05:
            test += (
                " <b>The Friedman test cannot separate these configurations</b> (p ≥ 0.05): "
                "the ranking below is not evidence that any one is better."
            )
    else:
        test = "Fewer than two data sets: no test across them."
    table = ranked["table"]
    view = pd.DataFrame(
        {
            "not worse than best": table["not_worse"].map(lambda v: "yes" if v else "no"),
            "configuration": [long_label(c) for c in table["config"]],
            "mean rank": table["mean_rank"],
            "wins / ties / losses": [
                f"{w} / {t} / {lo}"
                for w, t, lo in zip(table["wins"], table["ties"], table["losses"], strict=True)
            ],
            f"mean {metric}": table["mean_metric"],
            "mean leaves": table["mean_leaves"],
        }
    )
    tid = f"ranking-{r['family']}"
    return f"<h3>{r['family'].capitalize()} (metric {metric})</h3><p>{test}</p>" + _filterable(
        _table(
            view,
            left=("not worse than best", "configuration"),
            formats={
                "mean rank": lambda v: f"{v:.2f}",
                f"mean {metric}": lambda v: format_number(v, metric),
                "mean leaves": lambda v: f"{v:.1f}",
            },
            table_id=tid,
            sortable=True,
        ),
        tid,
        "configurations",
    )


_VERDICT_ORDER = {"pruned better": 0, "unpruned better": 1}


def _comparison(table: pd.DataFrame) -> str:
    # decisive rows first (pruned better, then unpruned better), then by data set
    table = table.assign(_order=table["verdict"].map(_VERDICT_ORDER).fillna(2))
    table = table.sort_values(["_order", "dataset"], kind="stable").reset_index(drop=True)
    metric_of = table["metric"]
    view = pd.DataFrame(
        {
            "verdict": table["verdict"]
            .map({"no evidence either way": "cannot tell"})
            .fillna(table["verdict"]),
            "data set": table["dataset"],
            "configuration": [long_label(Configuration.of(r)) for _, r in table.iterrows()],
            "metric": metric_of,
            "pruned": table["mean_pruned"],
            "unpruned": table["mean_unpruned"],
            "diff (pruned − unpruned)": table["diff"],
            "95% CI low": table["ci_low"],
            "95% CI high": table["ci_high"],
            "Holm p": table["p_holm"] if "p_holm" in table else table["p_value"],
            "leaves saved": table["leaves_saved"],
        }
    )
    metrics = list(metric_of)
    # per-metric formatting needs the row's metric: format columns row by row
    formatted = view.copy().astype(object)
    for col in ("pruned", "unpruned"):
        formatted[col] = [format_number(v, m) for v, m in zip(view[col], metrics, strict=True)]
    for col in ("diff (pruned − unpruned)", "95% CI low", "95% CI high"):
        formatted[col] = [
            format_number(v, m, signed=True) for v, m in zip(view[col], metrics, strict=True)
        ]
    formatted["Holm p"] = view["Holm p"].map(_p)
    formatted["leaves saved"] = view["leaves saved"].map(
        lambda v: "—" if _missing(v) else f"{v:.1f}".replace("-", "−")
    )
    return (
        "<p>diff = pruned − unpruned (negative: pruning lowers the loss); 95% interval by "
        "the corrected resampled t (Nadeau &amp; Bengio 2003); verdicts follow Holm-adjusted "
        "p. Click a column header to sort.</p>"
        + _filterable(
            _table(
                formatted,
                left=("verdict", "data set", "configuration", "metric"),
                table_id="comparison-table",
                sortable=True,
            ),
            "comparison-table",
            "rows",
        )
    )


def _failed(failed: list[dict]) -> str:
    parts = [f'<h2 id="failed">Failed trials ({len(failed)})</h2>']
    for f in failed:
        depth = "no cap" if f["max_depth"] is None else f["max_depth"]
        parts.append(
            f"<details><summary>{html.escape(f['dataset'])} {html.escape(f['criterion'])}"
            f" depth {depth} {html.escape(f['rule'])}</summary><pre>"
            f"{html.escape(f['error'] or '')}</pre></details>"
        )
    if not failed:
        parts.append("<p>None.</p>")
    return "".join(parts)


def write_report(
    database: str | Path, out: str | Path, study: str | None = None, **decision
) -> Path:
    """Write the report of a study to ``out`` (written whole, or not at all).

    Parameters
    ----------
    database, out : str or Path
    study : str, optional
    **decision
        ``metric``, ``margin``, ``alpha`` (see :func:`report_inputs`).

    Returns
    -------
    Path

    Raises
    ------
    InvalidParameterError
        If ``out`` cannot be written (a folder without write permission, a parent that is
        a file); nothing is left behind.
    """
    out = Path(out)

    def unwritable(err: OSError) -> InvalidParameterError:
        reason = err.strerror or type(err).__name__
        if isinstance(err, (FileExistsError, NotADirectoryError)):
            reason = "a file stands where a folder must be"
        where = f": {err.filename}" if err.filename else ""
        expected = f"a file in a folder that can be written ({reason}{where})"
        return parameter_error("out", "write_report", expected, str(out))

    try:  # before the slow part, so a bad path fails at once
        out.parent.mkdir(parents=True, exist_ok=True)
    except OSError as err:
        raise unwritable(err) from None
    with ResultStore(database, readonly=True) as store:
        text = build_report(store, study, **decision)
    partial = out.with_name(out.name + ".partial")
    try:
        partial.write_text(text, encoding="utf-8")
        partial.replace(out)
    except OSError as err:
        with contextlib.suppress(OSError):
            partial.unlink(missing_ok=True)
        raise unwritable(err) from None
    return out
