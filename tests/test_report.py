"""Tests of the HTML report (prunebench.report): the decision first, readable, self-contained."""

from __future__ import annotations

import os
import re
import shutil
import sqlite3
import subprocess
import tempfile
from html.parser import HTMLParser

import pytest
from click.testing import CliRunner

from prunebench.cli import main
from prunebench.report import (
    format_number,
    own_data,
    render_report,
    report_inputs,
    study_levels,
)
from prunebench.results import load_folds
from prunebench.snippets import CAUTION, CAUTION_OWN_DATA, long_label
from prunebench.store import ResultStore
from prunebench.vocabulary import Configuration

SHORT_LABEL = re.compile(
    r"(?:gini|entr|logl|sq|fmse|abs|pois) d=\w+ l=\d+(?: k=\d+ \S+ \S+| unpruned)"
)


class _Page(HTMLParser):
    """The page as a reader meets it: tags, ids, references, nesting, tables and cells."""

    VOID = {"meta", "img", "br", "hr", "link", "input"}

    def __init__(self):
        super().__init__()
        self.stack, self.errors, self.refs, self.tags, self.ids = [], [], [], [], []
        self.tables: dict[str, dict] = {}
        self._table = self._cell = None
        self.anchors: list[str] = []
        self.classes: list[tuple[str, str]] = []
        self.order: list[str] = []  # ids and classes in document order

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        self.tags.append(tag)
        self.refs += [v for k, v in attrs if k in ("src", "href") and v]
        if "id" in a:
            self.ids.append(a["id"])
            self.order.append("#" + a["id"])
        if "class" in a:
            self.order.append("." + a["class"])
        if tag == "a" and a.get("href", "").startswith("#"):
            self.anchors.append(a["href"][1:])
        if tag == "table":
            self._table = {"head": [], "rows": []}
            self.tables[a.get("id", f"table{len(self.tables)}")] = self._table
        if tag == "tr" and self._table is not None:
            self._table["rows"].append([])
        if tag in ("td", "th"):
            self._cell = [tag, ""]
        if tag not in self.VOID:
            self.stack.append(tag)

    def handle_data(self, data):
        if self._cell is not None:
            self._cell[1] += data

    def handle_endtag(self, tag):
        if tag in ("td", "th") and self._cell is not None and self._table is not None:
            kind, text = self._cell
            if kind == "th":
                self._table["head"].append(text)
            else:
                self._table["rows"][-1].append(text)
            self._cell = None
        if tag == "table":
            self._table = None
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"unexpected </{tag}>")
        else:
            self.stack.pop()


def _parse(text: str) -> _Page:
    page = _Page()
    page.feed(text)
    return page


@pytest.fixture(scope="module")
def inputs(small_db):
    with ResultStore(small_db, readonly=True) as store:
        return report_inputs(store)


@pytest.fixture(scope="module")
def report(small_db, tmp_path_factory):
    out = tmp_path_factory.mktemp("report") / "study.html"
    result = CliRunner().invoke(main, ["report", "--db", str(small_db), "--out", str(out)])
    assert result.exit_code == 0, result.output
    return out


def test_report_is_valid_self_contained_html(report):
    text = report.read_text()
    assert text.startswith("<!DOCTYPE html>")
    page = _parse(text)
    assert page.errors == [] and page.stack == []
    images = [r for r in page.refs if not r.startswith("#")]
    assert images and all(r.startswith("data:image/png;base64,") for r in images)
    assert not re.search(r"(src|href)\s*=\s*[\"']?(https?:|//|file:)", text)
    assert "<link" not in text and "@import" not in text  # no outside style or script
    assert "<script src" not in text
    # one family here (16 pruned + 4 unpruned configurations): every figure of it
    assert page.tags.count("img") == 7


def test_the_decision_comes_first_with_sentence_confidence_and_code(report):
    text = report.read_text()
    page = _parse(text)
    order = page.order
    assert order.index("#decision") < order.index("#factors") < order.index("#figures")
    box = text[text.index('class="decision"') : text.index('class="caution"')]
    # the sentence builder's words, the acceptable set, the held-out regret, the leaves
    assert re.search(r"Grow with (gini|entropy), (no depth cap|a depth cap of 3)", box)
    assert re.search(r"\d+ of 20 configurations are acceptable on 3 data sets", box)
    assert "Held out." in box and "Leaves." in box
    assert "model = " in box and "[factors.classification]" in box
    # benchmark data: the benchmark caution follows the decision
    caution_at = text.index('class="caution"')
    assert CAUTION.replace("'", "&#x27;") in text[caution_at : caution_at + 2000]


def test_contents_list_points_at_every_section(report):
    page = _parse(report.read_text())
    assert len(page.anchors) >= 8
    assert set(page.anchors) <= set(page.ids)  # every contents entry lands somewhere


def test_factor_table_one_row_per_contrast_verdict_first(report, inputs):
    page = _parse(report.read_text())
    table = page.tables["factors-classification"]
    assert table["head"][0] == "verdict on the metric"
    effects = inputs["effects"]
    contrasts = effects[effects["metric"] == "error"]
    assert len(table["rows"]) - 1 == len(contrasts) == 5  # pruning + 4 factors
    for row, (_, r) in zip(table["rows"][1:], contrasts.iterrows(), strict=True):
        assert row[1].startswith(r["factor"].replace("_", " ").replace("max depth", "max depth"))
        # the effect is written with the metric's three decimals and its interval beside it
        assert row[2] == format_number(r["estimate"], "error", signed=True)
        assert row[3] == (
            f"[{format_number(r['ci_low'], 'error', True)}, "
            f"{format_number(r['ci_high'], 'error', True)}]"
        )
        assert row[6].startswith("×")  # tree size as a ratio


def test_no_raw_machine_values_in_any_cell(report):
    page = _parse(report.read_text())
    raw = {"True", "False", "<NA>", "NaN", "nan", "None", "-0.000", "−0.000", "inf"}
    for name, table in page.tables.items():
        for row in table["rows"]:
            for cell in row:
                assert cell.strip() not in raw, (name, cell)
                assert "e+0" not in cell and "e-0" not in cell, (name, cell)
    assert page.tables["comparison-table"]["head"][0] == "verdict"


def test_every_short_label_in_a_figure_is_in_the_key(report, inputs):
    page = _parse(report.read_text())
    key = {row[0]: row[1] for row in page.tables["key"]["rows"][1:]}
    shown = set()
    for figs in inputs["figures"].values():
        for fig in figs.values():
            texts = [t.get_text() for ax in fig.axes for t in ax.texts]
            texts += [t.get_text() for leg in fig.legends for t in leg.get_texts()]
            texts += [t.get_text() for ax in fig.axes for t in ax.get_yticklabels()]
            shown |= {m.group(0) for t in texts for m in SHORT_LABEL.finditer(t)}
    assert len(shown) >= 8  # the difference plot's legend and the CD diagram use them
    assert shown <= set(key)
    for label, written in key.items():
        assert "·" in written and label in {
            Configuration.of(c).label() for c in inputs["rankings"][0]["table"]["config"]
        }
    # the tables write configurations out, never in short form
    for row in page.tables["comparison-table"]["rows"][1:]:
        assert SHORT_LABEL.search(row[2]) is None and "·" in row[2]


def test_a_partly_finished_study_says_so_first(small_db, tmp_path):
    copy = tmp_path / "partial.sqlite"
    shutil.copy(small_db, copy)
    with sqlite3.connect(copy) as conn:
        conn.execute(
            "UPDATE trials SET status = 'pending' WHERE rule = '1se' AND criterion = 'entropy' "
            "AND max_depth = 3"
        )
        pending = conn.execute("SELECT COUNT(*) FROM trials WHERE status = 'pending'").fetchone()
    with ResultStore(copy, readonly=True) as store:
        text = render_report(report_inputs(store))
    box = text[text.index('class="decision"') :]
    first = re.search(r"<p[^>]*>", box)
    assert 'class="status"' in first.group(0)
    assert f"{pending[0]} pending" in box[: box.index("</p>")]
    assert "not finished" in box[: box.index("</p>")]


def test_study_levels_follow_the_study_file_order(inputs):
    # the fixture lists depth "none" first, so the reference level is the unlimited tree
    levels = inputs["levels"]["classification"]
    assert levels["max_depth"] == ["none", 3] and levels["rule"] == ["min", "1se"]
    assert levels["min_samples_leaf"] == [1]  # not named: the one level the folds hold
    effects = inputs["effects"]
    depth = effects[(effects["factor"] == "max_depth") & (effects["metric"] == "error")]
    assert depth["reference"].tolist() == [None] and depth["level"].tolist() == [3]


def test_study_levels_take_a_familys_own_table(mixed_folds):
    text = (
        '[factors]\nmax_depth = [3, "none"]\nrule = ["1se", "min"]\n'
        '[factors.classification]\ncriterion = ["entropy", "gini"]\n'
        '[factors.regression]\ncriterion = ["squared_error"]\n'
    )
    levels = study_levels(text, mixed_folds)
    assert levels["classification"]["criterion"] == ["entropy", "gini"]
    assert levels["regression"]["criterion"] == ["squared_error"]
    assert levels["regression"]["max_depth"] == [3, "none"]


def test_report_of_a_search(search_db, tmp_path):
    # a search's configurations do not cross every level: the report is written, its
    # factor levels the smallest first (as the effects command takes them)
    with ResultStore(search_db, readonly=True) as store:
        inputs = report_inputs(store)
        folds = load_folds(store)
    levels = inputs["levels"]["classification"]
    assert levels["min_samples_leaf"] == sorted(folds["min_samples_leaf"].unique().tolist())
    assert levels["max_depth"] == [2, 4, None]
    out = tmp_path / "search.html"
    result = CliRunner().invoke(main, ["report", "--db", str(search_db), "--out", str(out)])
    assert result.exit_code == 0, result.output
    page = _parse(out.read_text(encoding="utf-8"))
    assert not page.errors
    assert "factor_heatmaps" in inputs["figures"]["classification"]


def test_caution_worded_for_the_teams_own_data():
    own = 'name = "x"\nseed = 1\ndatasets = [{ manifest = "a.toml" }]\n'
    bench = 'name = "x"\nseed = 1\ndatasets = ["iris"]\n'
    assert own_data(own) and not own_data(bench)
    assert "your own data" in CAUTION_OWN_DATA and "benchmark" in CAUTION


def test_long_labels_in_the_key_match_the_configuration(inputs):
    config = inputs["rankings"][0]["table"]["config"].iloc[0]
    c = Configuration.of(config)
    written = long_label(c)
    assert written.startswith({"gini": "gini", "entropy": "entropy"}[c.criterion])
    assert ("no cap" in written) == (c.max_depth is None)


def _chromium():
    return shutil.which("chromium") or shutil.which("chromium-browser")


def _screenshot(browser, page, shot, height=1000):
    with tempfile.TemporaryDirectory() as profile:
        subprocess.run(
            [
                browser,
                "--headless",
                "--no-sandbox",
                "--disable-gpu",
                "--no-first-run",
                "--disable-background-networking",
                "--disable-component-update",
                "--disable-sync",
                "--hide-scrollbars",
                f"--user-data-dir={profile}",
                f"--screenshot={shot}",
                f"--window-size=1400,{height}",
                page.as_uri(),
            ],
            capture_output=True,
            timeout=180,
            check=False,
        )


def _from_section(text: str, anchor: str) -> str:
    """The page with everything before one section removed, so its screen starts there."""
    script = (
        f"<script>var t = document.getElementById('{anchor}'), n = t.previousElementSibling;"
        "while (n) { var p = n.previousElementSibling; n.remove(); n = p; }"
        "document.querySelector('header').remove();</script>"
    )
    return text.replace("</body>", script + "</body>")


def test_report_screenshots_in_headless_chromium(report, tmp_path):
    from PIL import Image, ImageStat

    browser = _chromium()
    if browser is None:
        pytest.skip("Debian's chromium is not installed (.ci/run installs it when it can)")
    text = report.read_text()
    for name, anchor in (("first", None), ("factors", "factors"), ("figures", "figures")):
        page = tmp_path / f"{name}.html"
        page.write_text(text if anchor is None else _from_section(text, anchor), "utf-8")
        shot = tmp_path / f"{name}.png"
        _screenshot(browser, page, shot)
        assert shot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
        image = Image.open(shot).convert("L")
        assert image.size == (1400, 1000)
        # a blank page has one grey level; a rendered section has text and figures
        assert ImageStat.Stat(image).stddev[0] > 20, name


def test_report_of_a_missing_database_is_one_line(tmp_path):
    result = CliRunner().invoke(
        main, ["report", "--db", str(tmp_path / "none.sqlite"), "--out", str(tmp_path / "r.html")]
    )
    assert result.exit_code != 0 and "no such results database" in result.output
    assert not (tmp_path / "r.html").exists()


def _immutable(path):
    """Make a folder unwritable even for root (chattr +i), else by its mode; the undo."""
    if os.geteuid() == 0:
        if shutil.which("chattr") is None:
            pytest.skip("chattr is needed to make a folder read-only for root")
        if subprocess.run(["chattr", "+i", str(path)], capture_output=True).returncode:
            pytest.skip("this file system does not support the immutable attribute")
        return lambda: subprocess.run(["chattr", "-i", str(path)], check=True)
    os.chmod(path, 0o555)
    return lambda: os.chmod(path, 0o755)


def test_report_into_a_folder_that_cannot_be_written_is_one_line(small_db, tmp_path):
    folder = tmp_path / "locked"
    folder.mkdir()
    undo = _immutable(folder)
    try:
        result = CliRunner().invoke(
            main, ["report", "--db", str(small_db), "--out", str(folder / "r.html")]
        )
        left = sorted(p.name for p in folder.iterdir())
    finally:
        undo()
    assert result.exit_code == 2, result.output
    assert result.output.startswith("error: ") and result.output.count("\n") == 1
    assert "The '--out' option of prunebench report" in result.output and "r.html" in result.output
    assert left == []


def test_report_whose_parent_is_a_file_is_one_line(small_db, tmp_path):
    (tmp_path / "notes.txt").write_text("a file, not a folder")
    for out in (tmp_path / "notes.txt" / "r.html", tmp_path / "notes.txt" / "sub" / "r.html"):
        result = CliRunner().invoke(main, ["report", "--db", str(small_db), "--out", str(out)])
        assert result.exit_code == 2, result.output
        assert result.output.startswith("error: ") and result.output.count("\n") == 1
        assert "The '--out' option of prunebench report" in result.output
        assert "notes.txt" in result.output
    assert sorted(p.name for p in tmp_path.iterdir()) == ["notes.txt"]
    assert (tmp_path / "notes.txt").read_text() == "a file, not a folder"


def test_a_family_the_rule_cannot_answer_keeps_the_others_decision(mixed_db, monkeypatch):
    from prunebench import plots
    from prunebench.effects import EffectsError

    real = plots.recommend

    def refuses_regression(rows, *args, **kwargs):
        if (rows["task"] == "regression").any():
            raise EffectsError("no configuration has every outer fold of every data set")
        return real(rows, *args, **kwargs)

    monkeypatch.setattr(plots, "recommend", refuses_regression)
    with ResultStore(mixed_db, readonly=True) as store:
        inputs = report_inputs(store)
    text = render_report(inputs)
    assert [r["family"] for r in inputs["recommendations"]] == ["classification"]
    box = text[text.index('id="decision-regression"') :]
    assert "No recommendation yet:</b> no configuration has every outer fold" in box[:600]
    assert 'id="decision-classification"' in text and "Grow with" in text
    # both families still get their figures
    assert set(inputs["figures"]) == {"classification", "regression"}
