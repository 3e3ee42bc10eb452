"""The one message shape of a study file's mistakes, and the value helpers every section uses.

:class:`_Checker` turns a mistake into one :class:`~prunebench.exceptions.StudyError`
line naming the file, the line where the key could be found, and the key; the helpers
test one value each (an integer, a finite number, a list of distinct levels).
"""

from __future__ import annotations

import re

import numpy as np

from .exceptions import StudyError


class _Checker:
    """Raises one clear line per mistake, with the file and line where possible."""

    def __init__(self, text: str, source: str) -> None:
        self.lines = text.splitlines()
        self.source = source

    def line_of(self, key: str) -> int | None:
        *tables, leaf = key.split(".")
        table = ".".join(tables)
        current = ""
        pattern = re.compile(rf"^\s*{re.escape(leaf)}\s*=")
        header = re.compile(r"^\s*\[\[?\s*([^\]]+?)\s*\]\]?")
        for number, line in enumerate(self.lines, start=1):
            match = header.match(line)
            if match:
                current = match.group(1)
                continue
            if current == table and pattern.match(line):
                return number
        for number, line in enumerate(self.lines, start=1):
            if re.match(rf"^\s*\[\[?\s*{re.escape(key)}\s*\]\]?", line):
                return number
        return None

    def fail(self, key: str, message: str, line_key: str | None = None) -> StudyError:
        line = self.line_of(line_key or key)
        where = f"{self.source}:{line}" if line else self.source
        return StudyError(f"{where}: key '{key}': {message}")


def _is_int(v: object) -> bool:
    return isinstance(v, int) and not isinstance(v, bool)


def _number(v: object) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool) and np.isfinite(v)


def _levels(check: _Checker, key: str, value: object) -> list:
    if not isinstance(value, list):
        value = [value]
    if not value:
        raise check.fail(key, "needs at least one level")
    if len(set(map(repr, value))) != len(value):
        raise check.fail(key, f"has a repeated level in {value!r}")
    return value
