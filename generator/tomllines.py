"""Find the line of a key path in a TOML document.

`tomllib` returns plain dicts without positions, so error messages would lose the line.  This
module scans the text once and records the line of every table header and `key = value` line
under its full key path (`kernels[2].args`), which is enough to point a user at the mistake.
"""
from __future__ import annotations

import json
import re

_QUOTED = r'"(?:[^"\\]|\\.)*"'
_BARE = re.compile(r"[A-Za-z0-9_\-]+\Z")
_HEADER = re.compile(r"^\s*(\[\[?)\s*([^\]]+?)\s*\]\]?\s*(#.*)?$")
_PART = rf"(?:[A-Za-z0-9_\-]+|{_QUOTED}|'[^']*')"
_KEY = re.compile(rf"^\s*({_PART}(?:\s*\.\s*{_PART})*)\s*=")


def _json_escape(match: re.Match) -> str:
    code = int(match.group(1), 16)
    return json.dumps(chr(code))[1:-1] if code < 0x110000 else match.group(0)


def _unescape(body: str) -> str:
    """The value of a TOML basic string's body (JSON escapes plus \\UXXXXXXXX)."""
    body = re.sub(r"\\U([0-9A-Fa-f]{8})", _json_escape, body)
    try:
        return json.loads(f'"{body}"')
    except ValueError:
        return body


def _split_key(text: str) -> list[str]:
    parts = re.findall(rf"({_QUOTED})|'([^']*)'|([A-Za-z0-9_\-]+)", text)
    return [_unescape(a[1:-1]) if a else b or c for a, b, c in parts]


def key_part(name: str) -> str:
    """One key as it is shown in a key path: bare when TOML allows it, else quoted and escaped."""
    return name if _BARE.match(name) else json.dumps(name)


def parse_path(path: str) -> tuple:
    """'kernels[2].args[1]' -> ('kernels', 2, 'args', 1); quoted parts as `key_part` writes them."""
    out: list = []
    for quoted, name, index in re.findall(rf"({_QUOTED})|([^.\[\]\"]+)|\[(\d+)\]", path):
        out.append(int(index) if index else json.loads(quoted) if quoted else name)
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
                if table and isinstance(table[-1], int):     # [[x]]: x is at its first header
                    self.lines.setdefault(table[:-1], number)
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
