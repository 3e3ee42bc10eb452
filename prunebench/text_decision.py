"""The plain-text decision tables the command line prints: effects, interactions, recommend.

Built, like :mod:`prunebench.text`, from what the library returned, fitted to 100 columns.
"""

from __future__ import annotations

from .snippets import caution_for, estimator_block, study_fragment
from .text import _fmt, _wrap
from .vocabulary import config_label, is_relative

__all__ = ["effects_text", "interactions_text", "recommend_text"]


def _indented(block: str, indent: str = "     ") -> str:
    return "\n".join(indent + line for line in block.splitlines())


# ---- effects -----------------------------------------------------------------------------


def _level_text(value) -> str:
    return "none" if value is None else str(value)


def _interval(lo, hi, spec: str = "+.3f", sep: str = ",") -> str:
    return f"[{_fmt(lo, spec)}{sep}{_fmt(hi, spec)}]"


def _ratio_text(row) -> str:
    """Tree size as a ratio of leaf counts: ``×0.63 [0.55, 0.72]``."""
    bounds = _interval(row["ratio_low"], row["ratio_high"], ".2f", ", ")
    return f"×{_fmt(row['ratio'], '.2f')} {bounds}"


def _contrast(row) -> str:
    if row["factor"] == "pruning":
        return "pruned vs unpruned"
    return f"{row['factor']} {_level_text(row['level'])} vs {_level_text(row['reference'])}"


def effects_text(table, alpha: float) -> str:
    """:func:`prunebench.effects.factor_effects`' table as text, one block per task family.

    Per contrast: the effect on the primary metric with its 95% interval, the 95%
    prediction interval for a new data set, the effect on tree size as a ratio of leaf
    counts with its interval, and the verdict in words (tests at level ``alpha``).
    """
    if table.empty:
        return "no contrast to show: no level has trials paired with its reference level"
    lines = []
    for family, rows in table.groupby("family", sort=False):
        primary = rows[rows["metric"] != "n_leaves"]
        size = rows[rows["metric"] == "n_leaves"].set_index(["factor", "level"], drop=False)
        if primary.empty:
            continue
        first = primary.iloc[0]
        metric, k = first["metric"], int(first["n_datasets"])
        relative = (
            " (relative to each data set's unpruned loss)" if metric in ("mse", "mae") else ""
        )
        lines.append(
            _wrap(
                f"== {family}: effect of each factor on {metric}{relative} and on tree size, "
                f"across {k} data set{'s' if k != 1 else ''}; margin ±{first['margin']:g}"
            )
        )
        lines.append(
            f"{'contrast':<23} {'diff [95% CI]':<22} {'95% PI':<15} {'leaves [95% CI]':<18} "
            f"{'verdict':<10} size"
        )
        for _, r in primary.iterrows():
            key = (r["factor"], r["level"])
            s_row = size.loc[[key]].iloc[0] if key in size.index else None
            estimate = f"{_fmt(r['estimate'], '+.3f')} {_interval(r['ci_low'], r['ci_high'])}"
            ratio, smaller = "-", "-"
            if s_row is not None:
                ratio = _ratio_text(s_row)
                smaller = "-" if s_row["verdict"] == "undecided" else s_row["verdict"]
            contrast = _contrast(r)
            if len(contrast) > 23:  # a long name takes a line of its own
                lines.append(contrast)
                contrast = ""
            lines.append(
                f"{contrast:<23} {estimate:<22} {_interval(r['pi_low'], r['pi_high']):<15} "
                f"{ratio:<18} {r['verdict']:<10} {smaller}"
            )
        notes = {n for n in rows["note"] if isinstance(n, str) and n}
        lines += [_wrap(f"note: {n}") for n in sorted(notes)]
        lines.append(
            _wrap(
                f"diff = {metric} loss of the level minus the reference's (negative = the level "
                "is better; larger-is-better metrics as 1 - metric), a random-effects mean "
                "across data sets with the Hartung-Knapp 95% interval; PI = 95% prediction "
                "interval for a new data set; leaves = ratio of leaf counts (size: smaller or "
                "larger when its Holm-adjusted p < alpha). Verdict: "
                f"equivalent when the 90% interval lies inside ±{first['margin']:g}, else "
                f"better or worse when the Holm-adjusted p < {alpha:g}, else undecided."
            )
        )
        lines.append("")
    return "\n".join(lines)


def interactions_text(table) -> str:
    """:func:`prunebench.effects.interaction_effects`' table as text.

    Each contrast within each level of another factor; ``!`` marks a contrast whose
    within-level effects differ by more than the margin.
    """
    if table.empty:
        return "no interaction to show: fewer than two factors have two or more levels"
    lines = []
    for family, rows in table.groupby("family", sort=False):
        lines.append(
            _wrap(
                f"== {family}: each contrast on {rows['metric'].iloc[0]} within each level of "
                f"another factor (! = the effects differ by more than ±{rows['margin'].iloc[0]:g})"
            )
        )
        lines.append(f"{'contrast':<30} {'within':<24} {'diff [95% CI]':<24} {'spread':>7}")
        for _, r in rows.iterrows():
            within = f"{r['by']} = {_level_text(r['by_level'])}"
            estimate = f"{_fmt(r['estimate'], '+.3f')} {_interval(r['ci_low'], r['ci_high'])}"
            mark = " !" if r["flagged"] else ""
            lines.append(
                f"{_contrast(r)[:30]:<30} {within[:24]:<24} {estimate:<24} "
                f"{_fmt(r['spread'], '7.3f')}{mark}"
            )
        lines.append("")
    return "\n".join(lines)


# ---- recommend ---------------------------------------------------------------------------


def _counts_text(family: str, counts: dict | None) -> str:
    if not counts:
        return f"{family}: no trial counts"
    return (
        f"{family}: {counts['done']} done, {counts['failed']} failed, {counts['pending']} pending"
    )


def _recommend_header(recs: list[dict]) -> list[str]:
    """What a reader must know first: trial counts per family and what was left undecided."""
    lines = [_wrap("trials: " + "; ".join(_counts_text(r["family"], r["trials"]) for r in recs))]
    unfinished = [
        r["family"]
        for r in recs
        if r["trials"] and (r["trials"]["pending"] or r["trials"]["failed"])
    ]
    if unfinished:
        lines.append(
            _wrap(
                f"warning: the study is not complete for {', '.join(unfinished)}: the figures "
                "below use the finished trials only (run 'prunebench conduct' again to finish "
                "pending trials, with --retry-failed for failed ones)"
            )
        )
    undecided = [r for r in recs if not r["decided"]]
    if undecided:
        named = "; ".join(f"{r['family']} ({r['reason']})" for r in undecided)
        lines.append(_wrap(f"could not decide: {named}"))
    return lines


def _stability_lines(rows: list[dict] | None) -> list[str]:
    if not rows:
        return []
    lines = [
        "\n   stability of the recommended trees over the outer folds, per data set:",
        f"   {'dataset':<22} {'folds':>5} {'root':>5} {'share':>6} {'Jaccard':>7} "
        f"{'leaves p10-p90':>15} {'alpha p10-p90':>20}",
    ]
    for s in rows:
        root = s["root_feature"] if s["root_feature"] != "" else "leaf"
        leaves = f"{s['leaves_p10']:.0f}-{s['leaves_p90']:.0f}"
        alpha = f"{_fmt(s['alpha_p10'], '.3g')}-{_fmt(s['alpha_p90'], '.3g')}"
        lines.append(
            f"   {s['dataset'][:22]:<22} {s['n_folds']:>5} {root:>5} {s['root_share']:>6.2f} "
            f"{_fmt(s['jaccard'], '7.2f'):>7} {leaves:>15} {alpha:>20}"
        )
    lines.append(
        "   root: feature index most outer folds split on first (leaf: most folds' trees are "
        "a single\n   leaf); share: of the folds; Jaccard: mean pairwise similarity of the "
        "features the trees use"
    )
    return lines


def _decided_lines(r: dict) -> list[str]:
    m, margin = r["metric"], r["margin"]
    rel = " (share of the unpruned loss)" if is_relative(m) else ""
    k = len(r["datasets"])
    lines = [
        _wrap(
            f"recommended: {r['label']} — mean {m}{rel} {r['mean_loss']:.4g}, "
            f"{r['mean_leaves']:.1f} leaves on average, on {k} data set{'s' if k != 1 else ''}",
            "   ",
        ),
        _wrap(
            f"best by mean loss (B): {r['best']['label']} — mean {m}{rel} "
            f"{r['best']['mean_loss']:.4g}, {r['best']['mean_leaves']:.1f} leaves",
            "   ",
        ),
        _wrap(
            f"acceptable: {len(r['acceptable'])} of {r['n_configurations']} configurations "
            f"have a one-sided {1 - r['alpha']:.0%} upper bound of loss - B's below the margin "
            f"{margin:g} (fewest leaves first):",
            "   ",
        ),
    ]
    # as wide as the longest label shown: a cut label could read as another configuration
    shown = r["acceptable"][:10]
    width = max([34, *(len(config_label(a["config"])) for a in shown)])
    wide = max(12, len("mean " + m))
    lines.append(
        f"   {'configuration':<{width}} {'mean ' + m:>{wide}} {'leaves':>7} {'upper bound':>11}"
    )
    for a in shown:
        lines.append(
            f"   {config_label(a['config']):<{width}} {a['mean_loss']:>{wide}.4g} "
            f"{a['mean_leaves']:>7.1f} {a['upper_bound']:>+11.4f}"
        )
    if len(r["acceptable"]) > 10:
        lines.append(f"   ... and {len(r['acceptable']) - 10} more (see --json)")
    h = r["held_out"]
    if h and h["n_datasets"]:
        over = int(round(h["share_over_margin"] * h["n_datasets"]))
        lines.append(
            _wrap(
                f"the rule judged by leaving one data set out ({h['n_datasets']} data sets): "
                f"mean held-out regret {h['mean_regret']:+.4f} ({m} above the held-out set's "
                f"best, picked on other folds); over the margin on {over} of {h['n_datasets']} "
                f"({h['share_over_margin']:.0%})",
                "   ",
            )
        )
    else:
        lines.append(_wrap("one data set: the rule cannot be judged by leaving one out", "   "))
    lines += _stability_lines(r["stability"])
    lines += ["\n   as an estimator:\n", _indented(estimator_block(r))]
    lines += ["\n   as a study-file fragment:\n", _indented(study_fragment(r)), ""]
    return lines


def recommend_text(recs: list[dict]) -> str:
    """:func:`prunebench.recommend.recommend` as text: counts first, then per family the choice.

    First the trials done, failed and pending per task family and every family that
    could not be decided; then per family the recommended configuration, B, the
    acceptable set with its upper bounds, the held-out regret of the rule, the
    stability of the chosen trees (when stored), the code to paste and the caution,
    worded for the team's own data when the records say so (``own_data``, from
    :func:`prunebench.snippets.with_study`).
    """
    lines = _recommend_header(recs)
    lines.append("")
    for r in recs:
        head = (
            f"== {r['family']}: metric {r['metric']}, margin {r['margin']:g}, alpha {r['alpha']:g}"
        )
        lines.append(head)
        if not r["decided"]:
            lines += [_wrap(f"no recommendation: {r['reason']}", "   "), ""]
            continue
        lines += _decided_lines(r)
    own = any(r.get("own_data", False) for r in recs)
    lines.append(_wrap("Caution: " + caution_for(own)))
    return "\n".join(lines)
