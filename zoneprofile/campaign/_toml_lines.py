"""Line numbers of keys in a TOML text.

:mod:`tomllib` returns plain dicts without positions, so messages about a key
find its line by scanning the text: table headers (``[a.b]``, ``[[crystals]]``)
and ``key = value`` lines, with dotted and quoted keys. Keys inside inline tables
(``laws = { Mg = "..." }``) and multi-line values get the line of the key that
opens them.
"""

from __future__ import annotations

import re

__all__ = ["KeyLines"]

_HEADER = re.compile(r"^(\[\[|\[)\s*(.+?)\s*(\]\]|\])\s*(#.*)?$")


def _split_key(text: str) -> list[str]:
    """Split a dotted TOML key (``a."b.c".d``) into its parts."""
    parts, buf, quote = [], [], None
    for ch in text:
        if quote:
            if ch == quote:
                quote = None
            else:
                buf.append(ch)
        elif ch in "\"'":
            quote = ch
        elif ch == ".":
            parts.append("".join(buf).strip())
            buf = []
        else:
            buf.append(ch)
    parts.append("".join(buf).strip())
    return parts


def _key_of_line(line: str) -> str | None:
    """The key text of a ``key = value`` line, or None."""
    quote = None
    for i, ch in enumerate(line):
        if quote:
            if ch == quote:
                quote = None
        elif ch in "\"'":
            quote = ch
        elif ch == "#":
            return None
        elif ch == "=":
            key = line[:i].strip()
            return key or None
    return None


class KeyLines:
    """Map key paths of a TOML document to 1-based line numbers.

    A path is a tuple such as ``("crystals", 2, "temperature_c")`` (array-of-
    tables entries are indexed from 0) or ``("samples", "A", "temperature_c")``.
    """

    def __init__(self, text: str):
        self.lines: dict[tuple, int] = {}
        counters: dict[tuple, int] = {}
        table: tuple = ()
        in_multiline = None
        for number, raw in enumerate(text.splitlines(), start=1):
            line = raw.strip()
            if in_multiline:
                if line.count(in_multiline) % 2 == 1:
                    in_multiline = None
                continue
            if not line or line.startswith("#"):
                continue
            m = _HEADER.match(line)
            if m and len(m.group(1)) == len(m.group(3)):
                parts = tuple(_split_key(m.group(2)))
                if m.group(1) == "[[":
                    index = counters.get(parts, -1) + 1
                    counters[parts] = index
                    table = parts + (index,)
                else:
                    table = self._with_indices(parts, counters)
                self.lines.setdefault(table, number)
                continue
            key = _key_of_line(line)
            if key is None:
                continue
            path = table + tuple(_split_key(key))
            self.lines.setdefault(path, number)
            for quote in ('"""', "'''"):
                rest = line.split("=", 1)[1]
                if rest.count(quote) % 2 == 1:
                    in_multiline = quote

    @staticmethod
    def _with_indices(parts: tuple, counters: dict) -> tuple:
        """``[crystals.map]`` after ``[[crystals]]`` belongs to the last crystal."""
        out: list = []
        for k in range(len(parts)):
            out.append(parts[k])
            prefix = parts[: k + 1]
            if prefix in counters and k + 1 < len(parts):
                out.append(counters[prefix])
        return tuple(out)

    def line_of(self, path) -> int | None:
        """Line of ``path`` or of its nearest enclosing key; None if unknown."""
        path = tuple(path)
        while path:
            if path in self.lines:
                return self.lines[path]
            path = path[:-1]
        return None
