"""The report's decision-first sections: the decision box per task family and the factor effects."""

from __future__ import annotations

import html

import pandas as pd

from .factor_plots import contrast_name
from .report_html import _figure, _missing, _p, _percent, _table, format_number
from .snippets import decision_sentence, estimator_block, long_label, study_fragment
from .vocabulary import Configuration


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
    stab = _stability(r.get("stability"))
    return (
        f'<div class="decision" id="decision-{r["family"]}">'
        f"<h3>{r['family'].capitalize()} (metric {metric})</h3>{_status(r)}"
        f'<p class="sentence">{html.escape(decision_sentence(config))}</p>'
        f'<p class="muted">{html.escape(long_label(config))}</p>'
        + "".join(f"<p>{line}</p>" for line in lines)
        + stab
        + '<div class="cols"><div><b>As an estimator</b><pre>'
        # the whole record: the study's costs and smoothing belong in the estimator
        + html.escape(estimator_block(r))
        + "</pre></div><div><b>As a study-file fragment</b><pre>"
        + html.escape(study_fragment(r))
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


def _factor_section(effects: pd.DataFrame, figures: dict) -> str:
    parts = [
        "<p>Each row compares one level of a factor with the reference level (the first "
        "listed in the study file; in a search, the smallest level tried), on the pruned "
        "trees, averaged over the other factors; "
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
