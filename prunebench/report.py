"""One self-contained HTML report of a study: figures, tables, the study file, caution.

Everything is embedded (figures as base64 PNG, styles inline), so the file opens
offline and can be mailed or archived as it is.
"""

from __future__ import annotations

import base64
import contextlib
import html
import io
from pathlib import Path

import pandas as pd

from ._version import __version__
from .exceptions import InvalidParameterError, parameter_error
from .plots import FIGURES, build_figures, example_curves
from .ranks import recommendation
from .results import load_folds, study_overview
from .stats import comparison
from .store import ResultStore, utc_now
from .vocabulary import config_label

__all__ = ["CAUTION", "build_report", "render_report", "report_inputs", "write_report"]

CAUTION = (
    "A default chosen on benchmark data is a starting point. Validate it on your own data, and "
    "where the trees steer decisions about people (credit, health, insurance) follow your "
    "organisation's model-risk, fairness and legal review."
)

_STYLE = """
body { font-family: Georgia, 'DejaVu Serif', serif; margin: 0; color: #222; background: #fbfaf7; }
header { background: #2e4a3f; color: #f4f1e8; padding: 18px 32px; }
header h1 { margin: 0 0 4px 0; font-size: 26px; }
main { padding: 8px 32px 40px 32px; max-width: 1280px; }
h2 { border-bottom: 2px solid #c8b98a; padding-bottom: 3px; margin-top: 34px; color: #2e4a3f; }
table { border-collapse: collapse; font-family: 'DejaVu Sans Mono', monospace; font-size: 12px; }
th, td { border-bottom: 1px solid #ddd6c3; padding: 3px 8px; text-align: right; }
th { background: #efe9da; }
td.l, th.l { text-align: left; }
.caution { background: #fff3d6; border-left: 6px solid #b7791f; padding: 10px 16px; }
.good { color: #1d6b3a; } .bad { color: #9b2c2c; }
pre { background: #f1eee6; padding: 10px; overflow-x: auto; font-size: 12px; }
figure { margin: 18px 0; } figcaption { font-size: 13px; color: #555; }
img { max-width: 100%; border: 1px solid #ddd6c3; background: white; }
.scroll { max-height: 480px; max-width: 100%; overflow: auto; }
.scroll td, .scroll th { white-space: nowrap; }
"""


def _table(frame: pd.DataFrame, left: tuple = ()) -> str:
    head = "".join(
        f'<th class="{"l" if c in left else ""}">{html.escape(str(c))}</th>' for c in frame.columns
    )
    body = []
    for _, row in frame.iterrows():
        cells = []
        for c in frame.columns:
            v = row[c]
            text = (
                ""
                if v is None or (isinstance(v, float) and v != v)
                else (f"{v:.4g}" if isinstance(v, float) else str(v))
            )
            cls = "l" if c in left else ""
            if c == "verdict":
                cls += " good" if v == "pruned better" else " bad" if v == "unpruned better" else ""
            cells.append(f'<td class="{cls.strip()}">{html.escape(text)}</td>')
        body.append("<tr>" + "".join(cells) + "</tr>")
    return f"<table><tr>{head}</tr>{''.join(body)}</table>"


def _png(fig) -> str:
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=100)
    return base64.b64encode(buffer.getvalue()).decode()


def report_inputs(store: ResultStore, study: str | None = None) -> dict:
    """Everything a report shows, read through :mod:`prunebench.results` and computed.

    Parameters
    ----------
    store : ResultStore
        The results database, open for reading.
    study : str, optional
        Study name, when the database holds several.

    Returns
    -------
    dict
        :func:`prunebench.results.study_overview`'s entries, plus ``recommendations``,
        ``comparison`` and ``figures`` (name -> Figure).
    """
    overview = study_overview(store, study)
    folds = load_folds(store, overview["info"]["name"])
    recs = recommendation(folds)
    main_family = recs[0]["ranking"]  # classification first, as the figures show it
    figures = build_figures(folds, example_curves(store, folds, main_family), main_family)
    return {
        **overview,
        "recommendations": recs,
        "comparison": comparison(folds),
        "figures": figures,
    }


def build_report(store: ResultStore, study: str | None = None) -> str:
    """The report of a study as one HTML string.

    Parameters
    ----------
    store : ResultStore
    study : str, optional
        Study name, when the database holds several.

    Returns
    -------
    str
    """
    return render_report(report_inputs(store, study))


def render_report(inputs: dict) -> str:
    """The HTML of a report from :func:`report_inputs` (no reading, no statistics)."""
    info, recs = inputs["info"], inputs["recommendations"]
    parts = [
        _opening(info, inputs["counts"]),
        "<h2>Recommended default</h2>",
        *map(_recommended, recs),
        "<h2>Configurations ranked across datasets</h2>",
        *map(_ranked, recs),
        "<h2>Figures</h2>",
        *(_figure(name, fig) for name, fig in inputs["figures"].items()),
        _comparison(inputs["comparison"]),
        "<h2>Datasets</h2>"
        + _table(inputs["datasets"], left=("name", "task", "source", "licence")),
        _failed(inputs["failed"]),
        "<h2>Study file</h2><pre>" + html.escape(info["study_text"]) + "</pre>",
        "<h2>Environment</h2>"
        + _table(inputs["environments"], left=tuple(inputs["environments"].columns)),
        "</main></body></html>",
    ]
    return "".join(parts)


def _opening(info: dict, counts: dict) -> str:
    return (
        f'<!DOCTYPE html><html lang="en"><head><meta charset="utf-8">'
        f"<title>prunebench report: {html.escape(info['name'])}</title>"
        f"<style>{_STYLE}</style></head><body>"
        f"<header><h1>Study {html.escape(info['name'])}</h1>"
        f"<div>{html.escape(info['description'])}</div></header><main>"
        f'<p class="caution"><b>Caution.</b> {html.escape(CAUTION)}</p>'
        f"<p>Seed {info['seed']}; outer CV {info['outer_repeats']} repeats × "
        f"{info['outer_folds']} folds; trials done {counts.get('done', 0)}, failed "
        f"{counts.get('failed', 0)}, pending {counts.get('pending', 0)}. Report made "
        f"{utc_now()} by prunebench {__version__}.</p>"
    )


def _recommended(r: dict) -> str:
    regret = r["regret"].rename(columns={"regret": f"regret ({r['metric']})"})
    return (
        f"<h3>{r['family']}: {html.escape(config_label(r['config']))}</h3>"
        f"<p>Mean rank {r['mean_rank']:.2f} of {len(r['ranking']['table'])} configurations on "
        f"{len(r['ranking']['datasets'])} datasets; {r['mean_leaves']:.1f} leaves on average; "
        f"regret mean {r['mean_regret']:.4g}, worst {r['worst_regret']:.4g} "
        f"({r['metric']} above the best configuration on each dataset, corrected 95% CI).</p>"
        + _table(regret, left=("dataset", "best"))
    )


_RANK_COLUMNS = [
    "label",
    "mean_rank",
    "wins",
    "ties",
    "losses",
    "mean_metric",
    "mean_leaves",
    "not_worse",
]


def _ranked(r: dict) -> str:
    ranked = r["ranking"]
    f = ranked["friedman"]
    test = (
        f"Friedman χ² = {f['chi2']:.2f} (p = {f['p_chi2']:.3g}), Iman–Davenport F = "
        f"{f['ff']:.2f} (p = {f['p_ff']:.3g}), Nemenyi critical difference "
        f"{ranked['cd']:.2f}."
        if f
        else "Fewer than two datasets: no test across them."
    )
    view = ranked["table"].head(20)[_RANK_COLUMNS].rename(
        columns={
            "label": "configuration",
            "mean_metric": f"mean {ranked['metric']}",
            "not_worse": "not worse than best",
        }
    )
    return (
        f"<h3>{r['family']} (metric {ranked['metric']})</h3><p>{test}</p>"
        + _table(view, left=("configuration",))
    )


def _figure(name: str, fig) -> str:
    return (
        f'<figure><img alt="{html.escape(FIGURES[name])}" '
        f'src="data:image/png;base64,{_png(fig)}"><figcaption>'
        f"{html.escape(FIGURES[name])}</figcaption></figure>"
    )


# the report's table leaves out the per-arm intervals; the CSV export has every column
_NOT_SHOWN = (
    "pruned_ci",
    "unpruned_ci",
    "leaves_saved_ci",
    "leaves_pruned",
    "leaves_unpruned",
    "naive_p_value",
    "task",
    "n_folds",
)


def _comparison(table: pd.DataFrame) -> str:
    view = table[[c for c in table.columns if not c.startswith(_NOT_SHOWN)]]
    return (
        "<h2>Pruned against unpruned, per dataset and configuration</h2>"
        "<p>diff = pruned − unpruned; CI by corrected resampled t (Nadeau &amp; Bengio "
        "2003); the naive CI treats folds as independent and is too narrow.</p>"
        '<div class="scroll">'
        + _table(view, left=("dataset", "criterion", "rule", "prune_risk", "metric", "verdict"))
        + "</div>"
    )


def _failed(failed: list[dict]) -> str:
    parts = [f"<h2>Failed trials ({len(failed)})</h2>"]
    for f in failed:
        parts.append(
            f"<details><summary>{html.escape(f['dataset'])} {html.escape(f['criterion'])}"
            f" depth {f['max_depth']} {html.escape(f['rule'])}</summary><pre>"
            f"{html.escape(f['error'] or '')}</pre></details>"
        )
    if not failed:
        parts.append("<p>None.</p>")
    return "".join(parts)


def write_report(database: str | Path, out: str | Path, study: str | None = None) -> Path:
    """Write the report of a study to ``out`` (written whole, or not at all).

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
        text = build_report(store, study)
    partial = out.with_name(out.name + ".partial")
    try:
        partial.write_text(text, encoding="utf-8")
        partial.replace(out)
    except OSError as err:
        with contextlib.suppress(OSError):
            partial.unlink(missing_ok=True)
        raise unwritable(err) from None
    return out
