"""Find the line of a key path in a TOML document.

`tomllib` returns plain dicts without positions, so error messages would lose the line.  This
module scans the text once and records the line of every table header and `key = value` line
under its full key path (`kernels[2].args`), which is enough to point a user at the mistake.
"""
from __future__ import annotations

import re

_HEADER = re.compile(r"^\s*(\[\[?)\s*([^\]]+?)\s*\]\]?\s*(#.*)?$")
_KEY = re.compile(r"^\s*((?:[A-Za-z0-9_\-]+|\"[^\"]*\"|'[^']*')(?:\s*\.\s*(?:[A-Za-z0-9_\-]+|\"[^\"]*\"|'[^']*'))*)\s*=")


def _split_key(text: str) -> list[str]:
    parts = re.findall(r"\"([^\"]*)\"|'([^']*)'|([A-Za-z0-9_\-]+)", text)
    return [a or b or c for a, b, c in parts]


def parse_path(path: str) -> tuple:
    """'kernels[2].args[1]' -> ('kernels', 2, 'args', 1)."""
    out: list = []
    for name, index in re.findall(r"([^.\[\]]+)|\[(\d+)\]", path):
        out.append(int(index) if index else name)
    return tuple(out)


class LineIndex:
    """Maps key paths of one TOML text to 1-based line numbers."""

    def __init__(self, text: str):
        self.lines: dict[tuple, int] = {}
        self._scan(text)

    def _scan(self, text: str) -> None:
        table: tuple = ()
        counts: dict[tuple, int] = {}
        in_multiline = False
        for number, line in enumerate(text.splitlines(), start=1):
            if line.count('"""') % 2 or line.count("'''") % 2:
                in_multiline = not in_multiline
                if not in_multiline:
                    continue
            if in_multiline:
                continue
            header = _HEADER.match(line)
            if header:
                table = self._header(header, counts)
                self.lines.setdefault(table, number)
                continue
            key = _KEY.match(line)
            if key:
                self.lines.setdefault(table + tuple(_split_key(key.group(1))), number)

    @staticmethod
    def _header(match: re.Match, counts: dict) -> tuple:
        keys = tuple(_split_key(match.group(2)))
        if match.group(1) == "[[":
            index = counts.get(keys, 0)
            counts[keys] = index + 1
            return keys[:-1] + (keys[-1], index) if keys else keys
        return keys

    def line_of(self, path: str | tuple) -> int | None:
        """The line of `path`, or of its nearest enclosing key that was found."""
        keys = parse_path(path) if isinstance(path, str) else tuple(path)
        while keys:
            if keys in self.lines:
                return self.lines[keys]
            keys = keys[:-1]
        return None
