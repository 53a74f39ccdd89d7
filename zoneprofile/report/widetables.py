"""Wide tables made readable: settings shared by every crystal once, the rest split into narrow tables.

The per-crystal settings table had one column per setting (close to 40); no page
shows that. :func:`settings_tables_html` writes the settings every crystal shares
as a two-column table (setting, value) and the settings that differ as tables of
at most :data:`MAX_SETTING_COLUMNS` settings each, beside sample and crystal.
"""

from __future__ import annotations

__all__ = ["settings_tables_html", "MAX_SETTING_COLUMNS"]

#: Settings per table beside sample and crystal: 8 columns fit a 1400 px page at the report's font.
MAX_SETTING_COLUMNS = 6


def settings_tables_html(records, *, table, render, escape, max_columns: int = MAX_SETTING_COLUMNS) -> str:
    """HTML of the per-crystal settings: shared ones once, differing ones in narrow tables.

    ``table(header, rows)`` builds one table, ``render(value)`` one cell's HTML,
    ``escape(text)`` escapes text (the report's own helpers).
    """
    keys = []
    for r in records:
        for key in (r.get("parameters") or {}):
            if key not in keys:
                keys.append(key)
    if not keys:
        return ""
    shared, differing = [], []
    for key in keys:
        cells = [render((r.get("parameters") or {}).get(key)) if key in (r.get("parameters") or {}) else None
                 for r in records]
        (shared if None not in cells and len(set(cells)) == 1 else differing).append(key)
    parts = []
    if shared:
        first = records[0].get("parameters") or {}
        parts.append("<h4>Settings shared by every crystal</h4>")
        parts.append(table(["setting", "value"], [[escape(k), render(first.get(k))] for k in shared]))
    if differing:
        parts.append("<h4>Settings that differ between crystals</h4>")
        for start in range(0, len(differing), max_columns):
            chunk = differing[start:start + max_columns]
            rows = []
            for r in records:
                p = r.get("parameters") or {}
                rows.append([escape(r["sample"]), escape(r["crystal"]),
                             *[render(p.get(k)) if k in p else "" for k in chunk]])
            parts.append(table(["sample", "crystal", *chunk], rows))
    return "".join(parts)
