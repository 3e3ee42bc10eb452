"""The report's HTML building blocks: style, script, numbers as written, tables, figures."""

from __future__ import annotations

import base64
import html
import io
import math
import re

import numpy as np
import pandas as pd

from .plots import FIGURES
from .vocabulary import THREE_DECIMAL_METRICS

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
    if metric in THREE_DECIMAL_METRICS:
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


def _percent(value: float, signed: bool = False) -> str:
    """A share as a percentage with one decimal ("1%" for a round margin), no "-0.0%"."""
    if _missing(value):
        return "—"
    text = f"{100 * value:{'+' if signed else ''}.1f}"
    if text.lstrip("+-") == "0.0":
        text = "0.0"
    text = text[:-2] if text.endswith(".0") and not signed else text
    return text.replace("-", "−") + "%"


def _p(value) -> str:
    if _missing(value):
        return "—"
    return "<0.001" if value < 0.001 else f"{value:.3f}"


def _figure(anchor: str, name: str, fig) -> str:
    return (
        f'<figure id="{anchor}"><img alt="{html.escape(FIGURES[name])}" '
        f'src="data:image/png;base64,{_png(fig)}"><figcaption>'
        f"{html.escape(FIGURES[name])}</figcaption></figure>"
    )
