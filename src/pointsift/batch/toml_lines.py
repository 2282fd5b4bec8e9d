"""Line numbers of tables and keys in TOML text, for plan messages."""

from __future__ import annotations

import re

__all__ = ["KeyLocator"]


class KeyLocator:
    """Line numbers of tables and keys in TOML text.

    :mod:`tomllib` gives no positions for valid documents, so the text is
    scanned here: table headers, ``[[array]]`` entries and ``key =`` lines at
    the start of a statement (strings, comments and multi-line arrays are
    skipped so their content is never taken for a key).
    """

    _HEADER = re.compile(r"\s*(\[\[|\[)\s*([^\]]+?)\s*(\]\]|\])\s*(#.*)?$")
    _KEY = re.compile(r"""\s*("(?:[^"\\]|\\.)*"|'[^']*'|[A-Za-z0-9_\-]+(?:\s*\.\s*[A-Za-z0-9_\-]+)*)\s*=""")

    def __init__(self, text: str) -> None:
        self.tables: dict[object, int] = {}
        self.keys: dict[tuple[object, str], int] = {}
        arrays: dict[str, int] = {}
        current: object = ""
        depth = 0  # open brackets / braces of a value spanning lines
        in_multiline: str | None = None
        for number, line in enumerate(text.splitlines(), start=1):
            if in_multiline is not None:
                end = line.find(in_multiline)
                if end < 0:
                    continue
                line = line[end + 3 :]
                in_multiline = None
                depth, in_multiline = self._scan(line, depth)
                continue
            if depth == 0:
                header = self._HEADER.match(line)
                if header:
                    name = header.group(2).strip().strip("\"'")
                    if header.group(1) == "[[":
                        index = arrays.get(name, -1) + 1
                        arrays[name] = index
                        current = (name, index)
                    else:
                        current = name
                    self.tables.setdefault(current, number)
                    continue
                key = self._KEY.match(line)
                if key:
                    name = key.group(1).strip().strip("\"'")
                    self.keys.setdefault((current, name), number)
                    line = line[key.end() :]
            depth, in_multiline = self._scan(line, depth)

    @staticmethod
    def _scan(line: str, depth: int) -> tuple[int, str | None]:
        """Follow brackets outside strings; report an unclosed multi-line string."""
        i = 0
        while i < len(line):
            char = line[i]
            if char == "#":
                break
            if line.startswith('"""', i) or line.startswith("'''", i):
                quote = line[i : i + 3]
                end = line.find(quote, i + 3)
                if end < 0:
                    return depth, quote
                i = end + 3
                continue
            if char in "\"'":
                j = i + 1
                while j < len(line) and line[j] != char:
                    j += 2 if (char == '"' and line[j] == "\\") else 1
                i = j + 1
                continue
            if char in "[{":
                depth += 1
            elif char in "]}":
                depth = max(depth - 1, 0)
            i += 1
        return depth, None

    def line_of(self, table: object, key: str | None = None) -> int | None:
        """Line of ``key`` in ``table`` (or of the table header when key is None)."""
        if key is not None and (table, key) in self.keys:
            return self.keys[(table, key)]
        return self.tables.get(table)
