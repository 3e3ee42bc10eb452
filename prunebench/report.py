"""One self-contained HTML report of a study: the decision first, then the evidence.

The page opens with a decision box per task family (the recommended default in one
sentence, how confident the rule is, the leaves it saves, the code to paste), then
the caution, the factor table and its figure, every figure per task family, and the
long tables (sortable and filterable by a few lines of the page's own script).
Everything is embedded (figures as base64 PNG, styles and script inline), so the
file opens offline and can be mailed or archived as it is.
"""

from __future__ import annotations

import base64
import contextlib
import html
import io
import math
import re
from pathlib import Path

import numpy as np
import pandas as pd

from ._version import __version__
from .exceptions import InvalidParameterError, parameter_error
from .factor_plots import contrast_name
from .plots import (
    FIGURES,
    decision_inputs,
    family_figures,
    own_data,
    study_levels,
)
from .ranks import ranking
from .results import decision_settings, load_folds, study_overview
from .snippets import (
    CAUTION,
    caution_for,
    decision_sentence,
    estimator_block,
    long_label,
    study_fragment,
)
from .stats import comparison
from .store import ResultStore, utc_now
from .vocabulary import Configuration

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

_STYLE = """
body { font-family: Georgia, 'DejaVu Serif', serif; margin: 0; color: #222; background: #fbfaf7; }
header { background: #2e4a3f; color: #f4f1e8; padding: 16px 32px; }
header h1 { margin: 0 0 4px 0; font-size: 26px; }
main { padding: 8px 32px 40px 32px; max-width: 1320px; }
nav.contents { font-size: 14px; margin: 10px 0; }
nav.contents a { margin-right: 14px; color: #2e4a3f; }
h2 { border-bottom: 2px solid #c8b98a; padding-bottom: 3px; margin-top: 30px; color: #2e4a3f; }
table { border-collapse: collapse; font-family: 'DejaVu Sans', Arial, sans-serif; font-size: 13px; }
th, td { border-bottom: 1px solid #ddd6c3; padding: 3px 8px; text-align: right; }
td { vertical-align: top; white-space: nowrap; } td.wrap { white-space: normal; }
th { background: #efe9da; position: sticky; top: 0; }
table.sortable th { cursor: pointer; } table.sortable th:hover { background: #e2d9c2; }
td.l, th.l { text-align: left; }
.decision { background: #eef5ef; border: 2px solid #2e4a3f; border-radius: 6px;
            padding: 8px 20px 12px 20px; margin: 14px 0; }
.decision h3 { margin: 6px 0; color: #2e4a3f; }
.sentence { font-size: 19px; font-weight: bold; margin: 6px 0 8px 0; }
.status { background: #fde8e8; border-left: 6px solid #9b2c2c; padding: 6px 12px;
          font-weight: bold; }
.cols { display: flex; gap: 20px; flex-wrap: wrap; } .cols > div { flex: 1 1 420px; }
.caution { background: #fff3d6; border-left: 6px solid #b7791f; padding: 10px 16px; }
.good { color: #1d6b3a; font-weight: bold; } .bad { color: #9b2c2c; font-weight: bold; }
.muted { color: #666; }
pre { background: #f1eee6; padding: 10px; overflow-x: auto; font-size: 12px; }
figure { margin: 18px 0; } figcaption { font-size: 13px; color: #555; }
img { max-width: 100%; border: 1px solid #ddd6c3; background: white; }
.scroll { max-height: 640px; max-width: 100%; overflow: auto; border: 1px solid #ddd6c3; }
input.filter { margin: 6px 0; padding: 3px 6px; width: 320px; font-size: 13px; }
"""

# a few lines of the page's own script: click a header to sort, type to filter
_SCRIPT = """
document.querySelectorAll('table.sortable').forEach(function (t) {
  t.querySelectorAll('th').forEach(function (th, i) {
    th.addEventListener('click', function () {
      var rows = Array.from(t.tBodies[0].rows), up = th.dataset.up !== '1';
      rows.sort(function (a, b) {
        var x = a.cells[i].dataset.v || a.cells[i].textContent,
            y = b.cells[i].dataset.v || b.cells[i].textContent,
            nx = parseFloat(x), ny = parseFloat(y);
        var c = (!isNaN(nx) && !isNaN(ny)) ? nx - ny : x.localeCompare(y);
        return up ? c : -c;
      });
      th.dataset.up = up ? '1' : '0';
      rows.forEach(function (r) { t.tBodies[0].appendChild(r); });
    });
  });
});
document.querySelectorAll('input.filter').forEach(function (box) {
  box.addEventListener('input', function () {
    var t = document.getElementById(box.dataset.table), q = box.value.toLowerCase();
    Array.from(t.tBodies[0].rows).forEach(function (r) {
      r.style.display = r.textContent.toLowerCase().indexOf(q) >= 0 ? '' : 'none';
    });
  });
});
"""

#: metrics shown with three decimals (rates, probabilities, log loss); others with 4 figures
_DECIMAL_METRICS = {"error", "accuracy", "balanced_accuracy", "brier", "log_loss", "auc", "r2"}


def _missing(value) -> bool:
    if value is None or value is pd.NA or value is pd.NaT:
        return True
    try:
        return bool(isinstance(value, float | np.floating) and math.isnan(value))
    except TypeError:
        return False


def format_number(value, metric: str | None = None, signed: bool = False) -> str:
    """A number as the report writes it: per metric, never "-0.000", "—" when missing.

    Parameters
    ----------
    value : float, int, bool or None
    metric : str, optional
        ``error``, probabilities and log loss get three decimals; MSE and other
        unbounded losses four significant figures; None: four significant figures.
    signed : bool, default=False
        Write a "+" before positive values (differences).

    Returns
    -------
    str
    """
    if _missing(value):
        return "—"
    if isinstance(value, bool | np.bool_):
        return "yes" if value else "no"
    if isinstance(value, int | np.integer):
        return f"{int(value):+d}" if signed else str(int(value))
    value = float(value)
    if not math.isfinite(value):
        return "∞" if value > 0 else "−∞"
    sign = "+" if signed else ""
    if metric in _DECIMAL_METRICS:
        text = f"{value:{sign}.3f}"
    elif abs(value) >= 1e4:
        text = f"{value:{sign},.0f}"  # 12,346 rather than 1.235e+04
    else:
        text = f"{value:{sign}.4g}"
    if re.fullmatch(r"[-+]?0(\.0*)?", text):
        text = text.lstrip("+-")  # no "-0.000"
    return text.replace("-", "−")


def _cell(value) -> str:
    """Default text of a table cell."""
    if _missing(value):
        return "—"
    if isinstance(value, bool | np.bool_):
        return "yes" if value else "no"
    if isinstance(value, float | np.floating):
        return format_number(value)
    return str(value)


def _table(
    frame: pd.DataFrame,
    left: tuple = (),
    formats: dict | None = None,
    table_id: str | None = None,
    sortable: bool = False,
    wrap: tuple = (),
) -> str:
    """An HTML table; ``formats`` maps a column to a function of the value.

    Cells stay on one line except in the ``wrap`` columns (long free text).
    """
    formats = formats or {}
    cls = ' class="sortable"' if sortable else ""
    tid = f' id="{table_id}"' if table_id else ""
    head = "".join(
        f'<th class="{"l" if c in left else ""}">{html.escape(str(c))}</th>' for c in frame.columns
    )
    body = []
    for row in frame.itertuples(index=False):
        cells = []
        for c, v in zip(frame.columns, row, strict=True):
            text = formats[c](v) if c in formats else _cell(v)
            klass = ("l" if c in left else "") + (" wrap" if c in wrap else "")
            if c == "verdict" or c == "verdict on the metric":
                klass += " " + _verdict_class(text)
            sort = ""
            if isinstance(v, int | float | np.integer | np.floating) and not _missing(v):
                sort = f' data-v="{float(v):.12g}"'
            cells.append(f'<td class="{klass.strip()}"{sort}>{html.escape(text)}</td>')
        body.append("<tr>" + "".join(cells) + "</tr>")
    return f"<table{tid}{cls}><thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table>"


def _verdict_class(text: str) -> str:
    good = ("pruned better", "better", "smaller", "no practical difference")
    bad = ("unpruned better", "worse", "larger")
    if text.startswith(good):
        return "good"
    if text.startswith(bad):
        return "bad"
    return ""


def _filterable(table_html: str, table_id: str, what: str) -> str:
    return (
        f'<input class="filter" data-table="{table_id}" placeholder="filter {what} '
        f'(type a data set, level or verdict)"><div class="scroll">{table_html}</div>'
    )


def _png(fig) -> str:
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=100)
    return base64.b64encode(buffer.getvalue()).decode()


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
    folds = load_folds(store, name)
    settings = decision_settings(store, name, metric, margin, alpha)
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


def _percent(value: float, signed: bool = False) -> str:
    """A share as a percentage with one decimal ("1%" for a round margin), no "-0.0%"."""
    if _missing(value):
        return "—"
    text = f"{100 * value:{'+' if signed else ''}.1f}"
    if text.lstrip("+-") == "0.0":
        text = "0.0"
    text = text[:-2] if text.endswith(".0") and not signed else text
    return text.replace("-", "−") + "%"


def _loss_text(value: float, metric: str) -> str:
    if metric in ("mse", "mae"):
        return f"{_percent(value)} of the unpruned {metric}"
    return f"{format_number(value, metric)} {metric}"


def _status(r: dict) -> str:
    t = r.get("trials") or {}
    done, failed, pending = (t.get(k, 0) for k in ("done", "failed", "pending"))
    if not (failed or pending):
        return ""
    return (
        f'<p class="status">This study is not finished for {r["family"]}: {done} trials done, '
        f"{failed} failed, {pending} pending. The recommendation below uses the finished "
        "trials only and may change.</p>"
    )


def _undecided_box(family: str, problem: str, counts: dict | None) -> str:
    """The box of a family the decision rule cannot answer yet, saying why."""
    return (
        f'<div class="decision" id="decision-{family}"><h3>{family.capitalize()}</h3>'
        + _status({"family": family, "trials": counts or {}})
        + f"<p><b>No recommendation yet:</b> {html.escape(problem)}.</p></div>"
    )


def _decision_box(r: dict) -> str:
    metric, margin = r["metric"], r["margin"]
    config = r["config"]
    acceptable = r["acceptable"]
    mine = next((a for a in acceptable if a["config"] == config), acceptable[0])
    held = r["held_out"]
    n_conf, k = r["n_configurations"], len(r["datasets"])
    lines = [
        f"<b>Confidence.</b> {len(acceptable)} of {n_conf} configurations are acceptable on "
        f"{k} data set{'s' if k != 1 else ''}: the one-sided {100 * (1 - r['alpha']):g}% upper "
        f"bound of their excess loss over the best configuration lies below the margin "
        f"{_loss_text(margin, metric)}. "
        + (
            "The recommendation is the lowest-loss configuration itself."
            if r["best"]["config"] == config
            else f"The recommendation's bound is {_loss_text(mine['upper_bound'], metric)}."
        ),
    ]
    same_best = r["best"]["config"] == config
    if len(acceptable) > 1:
        lines.append(
            f"<b>The data cannot tell these {len(acceptable)} configurations apart</b> from the "
            f"lowest-loss one ({html.escape(long_label(r['best']['config']))}"
            f"{', the recommendation itself' if same_best else ''}); the choice among them is "
            "the smallest tree."
        )
    else:
        lines.append("Only the lowest-loss configuration is within the margin.")
    if held["n_datasets"]:
        lines.append(
            f"<b>Held out.</b> Choosing on all data sets but one and scoring on the one left "
            f"out, the rule's choice trails the best there by "
            f"{_loss_text(held['mean_regret'], metric)} on average, and by more than the margin "
            f"on {100 * held['share_over_margin']:.0f}% of {held['n_datasets']} data sets."
        )
    else:
        lines.append(
            "<b>Held out.</b> One data set only: the rule cannot be judged by leaving one out."
        )
    unpruned = r.get("unpruned_leaves", float("nan"))
    saved = ""
    if not _missing(unpruned) and Configuration.of(config).pruned:
        saved = (
            f"<b>Leaves.</b> {r['mean_leaves']:.1f} on average against {unpruned:.1f} for the "
            f"unpruned tree grown the same way: {unpruned - r['mean_leaves']:.1f} leaves saved "
            f"(×{r['mean_leaves'] / unpruned:.2f})."
        )
    else:
        saved = f"<b>Leaves.</b> {r['mean_leaves']:.1f} on average (an unpruned tree)."
    lines.append(saved)
    rec = {"family": r["family"], "config": config}
    stab = _stability(r.get("stability"))
    return (
        f'<div class="decision" id="decision-{r["family"]}">'
        f"<h3>{r['family'].capitalize()} (metric {metric})</h3>{_status(r)}"
        f'<p class="sentence">{html.escape(decision_sentence(config))}</p>'
        f'<p class="muted">{html.escape(long_label(config))}</p>'
        + "".join(f"<p>{line}</p>" for line in lines)
        + stab
        + '<div class="cols"><div><b>As an estimator</b><pre>'
        + html.escape(estimator_block(rec))
        + "</pre></div><div><b>As a study-file fragment</b><pre>"
        + html.escape(study_fragment(rec))
        + "</pre></div></div></div>"
    )


def _stability(records) -> str:
    if not records:
        return '<p class="muted">Stability of the chosen trees: not stored in this database.</p>'
    frame = pd.DataFrame(records)
    view = pd.DataFrame(
        {
            "data set": frame["dataset"],
            "root split": frame["root_feature"].replace("", "(single leaf)"),
            "folds splitting first on it": frame["root_share"].map(lambda v: f"{100 * v:.0f}%"),
            "feature-set similarity": frame["jaccard"].map(lambda v: format_number(v, "error")),
            "leaves (10th–90th pct)": [
                f"{a:.0f}–{b:.0f}"
                for a, b in zip(frame["leaves_p10"], frame["leaves_p90"], strict=True)
            ],
        }
    )
    return "<p><b>Stability</b> of the chosen trees across outer folds:</p>" + _table(
        view, left=("data set", "root split")
    )


_VERDICT_WORDS = {
    "equivalent": "no practical difference",
    "better": "better",
    "worse": "worse",
    "undecided": "cannot tell",
}


def _factor_rows(effects: pd.DataFrame, family: str) -> pd.DataFrame:
    part = effects[effects["family"] == family]
    main = part[part["metric"] != "n_leaves"]
    size = part[part["metric"] == "n_leaves"]
    rows = []
    for _, r in main.iterrows():
        m = r["metric"]
        s = size[(size["factor"] == r["factor"]) & (size["level"].astype(str) == str(r["level"]))]
        s = s.iloc[0] if len(s) else None
        relative = m in ("mse", "mae")

        def num(v, signed=True, m=m, relative=relative):
            if _missing(v):
                return "—"
            return _percent(v, signed) if relative else format_number(v, m, signed)

        verdict = _VERDICT_WORDS.get(r["verdict"], r["verdict"])
        if r["verdict"] == "equivalent":
            verdict += f" (within ±{num(r['margin'], False)})"
        rows.append(
            {
                "verdict on the metric": verdict,
                "contrast": contrast_name(r),
                f"effect on {m}": num(r["estimate"]),
                "95% interval": f"[{num(r['ci_low'])}, {num(r['ci_high'])}]",
                "prediction interval (new data set)": (
                    "—" if _missing(r["pi_low"]) else f"[{num(r['pi_low'])}, {num(r['pi_high'])}]"
                ),
                "Holm p": _p(r["p_holm"]),
                "tree size": "—" if s is None else f"×{s['ratio']:.2f}",
                "size 95% interval": (
                    "—" if s is None else f"[×{s['ratio_low']:.2f}, ×{s['ratio_high']:.2f}]"
                ),
                "size verdict": "—"
                if s is None
                else _VERDICT_WORDS.get(s["verdict"], s["verdict"]),
                "data sets": int(r["n_datasets"]),
                "note": r["note"] if isinstance(r["note"], str) else "",
            }
        )
    return pd.DataFrame(rows)


def _hoist_note(view: pd.DataFrame) -> tuple[pd.DataFrame, str]:
    """A note every row shares goes above the table, once; no empty note column."""
    notes = set(view["note"]) if "note" in view else set()
    if len(notes) == 1:
        (note,) = notes
        return view.drop(columns="note"), (
            f'<p class="muted">Note: {html.escape(note)}.</p>' if note else ""
        )
    return view, ""


def _p(value) -> str:
    if _missing(value):
        return "—"
    return "<0.001" if value < 0.001 else f"{value:.3f}"


def _factor_section(effects: pd.DataFrame, figures: dict) -> str:
    parts = [
        "<p>Each row compares one level of a factor with the reference level (the first "
        "listed in the study file), on the pruned trees, averaged over the other factors; "
        "per data set paired over outer folds (Nadeau–Bengio variance), then combined across "
        "data sets by random effects (DerSimonian–Laird, Hartung–Knapp interval). Negative "
        "effects mean the level is better. The prediction interval is where the effect on a "
        "new data set is expected to fall. Tree size is the ratio of leaf counts.</p>"
    ]
    for family in effects["family"].unique():
        view, note = _hoist_note(_factor_rows(effects, family))
        parts.append(f"<h3>{family.capitalize()}</h3>{note}")
        parts.append(
            _table(
                view,
                left=("verdict on the metric", "contrast", "size verdict", "note"),
                wrap=("verdict on the metric", "note"),
                table_id=f"factors-{family}",
                sortable=True,
            )
        )
        fig = figures.get(family, {}).get("factor_effects")
        if fig is not None:
            parts.append(_figure(f"{family}_factor_effects", "factor_effects", fig))
    return "".join(parts)


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


def _figure(anchor: str, name: str, fig) -> str:
    return (
        f'<figure id="{anchor}"><img alt="{html.escape(FIGURES[name])}" '
        f'src="data:image/png;base64,{_png(fig)}"><figcaption>'
        f"{html.escape(FIGURES[name])}</figcaption></figure>"
    )


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
    rows_html = []
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
    del rows_html
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
