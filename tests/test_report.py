"""Tests of the HTML report (prunebench.report)."""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import tempfile
from html.parser import HTMLParser

import pytest
from click.testing import CliRunner

from prunebench.cli import main


class _Checker(HTMLParser):
    """Collects tags, references and nesting errors."""

    VOID = {"meta", "img", "br", "hr", "link", "input"}

    def __init__(self):
        super().__init__()
        self.stack, self.errors, self.refs, self.tags = [], [], [], []

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        self.refs += [v for k, v in attrs if k in ("src", "href") and v]
        if tag not in self.VOID:
            self.stack.append(tag)

    def handle_endtag(self, tag):
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"unexpected </{tag}>")
        else:
            self.stack.pop()


@pytest.fixture(scope="module")
def report(small_db, tmp_path_factory):
    out = tmp_path_factory.mktemp("report") / "study.html"
    result = CliRunner().invoke(main, ["report", "--db", str(small_db), "--out", str(out)])
    assert result.exit_code == 0, result.output
    return out


def test_report_is_valid_self_contained_html(report):
    text = report.read_text()
    assert text.startswith("<!DOCTYPE html>")
    checker = _Checker()
    checker.feed(text)
    assert checker.errors == [] and checker.stack == []
    assert checker.refs and all(r.startswith("data:image/png;base64,") for r in checker.refs)
    assert not re.search(r"(src|href)\s*=\s*[\"']?https?:", text)
    assert checker.tags.count("img") == 6


def test_report_carries_the_study_the_caution_and_the_tables(report):
    text = report.read_text()
    for needle in (
        "fixture-study",
        "Caution",
        "fairness and legal review",
        "Recommended default",
        "Friedman",
        "Failed trials (0)",
        "[outer]",
        "scikit_learn",
    ):
        assert needle in text, needle
    assert not report.with_name(report.name + ".partial").exists()


def test_report_opens_in_headless_chromium(report):
    browser = shutil.which("chromium") or shutil.which("chromium-browser")
    if browser is None:
        pytest.skip("Debian's chromium is not installed (.ci/run installs it when it can)")
    shot = report.with_suffix(".png")
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
                f"--user-data-dir={profile}",
                f"--screenshot={shot}",
                "--window-size=1400,2000",
                report.as_uri(),
            ],
            capture_output=True,
            timeout=120,
            check=False,
        )
    assert shot.exists() and shot.stat().st_size > 50_000
    assert shot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


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
    assert "'out'" in result.output and "r.html" in result.output
    assert left == []


def test_report_whose_parent_is_a_file_is_one_line(small_db, tmp_path):
    (tmp_path / "notes.txt").write_text("a file, not a folder")
    for out in (tmp_path / "notes.txt" / "r.html", tmp_path / "notes.txt" / "sub" / "r.html"):
        result = CliRunner().invoke(main, ["report", "--db", str(small_db), "--out", str(out)])
        assert result.exit_code == 2, result.output
        assert result.output.startswith("error: ") and result.output.count("\n") == 1
        assert "'out'" in result.output and "notes.txt" in result.output
    assert sorted(p.name for p in tmp_path.iterdir()) == ["notes.txt"]
    assert (tmp_path / "notes.txt").read_text() == "a file, not a folder"
