"""The hit table on a terminal: what fits, and a note for everything that does not.

A screen is for reading, a file (``-o``) for keeping; the screen therefore shows the columns a
reader needs (the keyword in context, document and sentence, each variable's text and reading,
and every ``show``/``count by`` column) and names the others in a closing note, instead of
cutting columns off the right edge.  Two layouts:

* **across**: one line per row, when every column fits at its full width, with the left and
  right context cut from their outer ends (marked "…") down to no less than ``CONTEXT_MIN``
  characters, then the hit (cut at its end; each variable's text has its own column);
* **down**: one block per row, a label and its whole value per line, wrapped at the width,
  when the columns do not fit across.  Nothing is cut.

Rows past ``max_rows`` are counted in a note that says how to get them all.

>>> import pyarrow as pa
>>> print(render(pa.table({"lemma": ["ferry", None], "count": [3, 1]}), "aggregate", 40))
lemma      count
---------  -----
ferry          3
(missing)      1
(2 rows)
"""
from __future__ import annotations

import textwrap
from typing import Sequence

import pyarrow as pa
from rich.cells import cell_len

MISSING = "(missing)"
CONTEXT = ("left", "hit", "right")
CONTEXT_MIN = 10      # the narrowest left or right context worth showing across
SEP = "  "


def file_cell(value) -> str:
    """A value as CSV and TSV write it: nothing for a missing value, a float as the shortest
    decimal that reads back as the same double (Python's repr), everything else as str()."""
    if value is None:
        return ""
    if isinstance(value, float):
        return repr(value)
    return str(value)


def screen_cell(value) -> str:
    """A value as the screen shows it: as in a file, but ``(missing)`` for no value."""
    return MISSING if value is None else file_cell(value)


def render(table: pa.Table, kind: str, width: int, max_rows: int | None = 50,
           shown: Sequence[str] | None = None) -> str:
    """The screen text of a hit table (``kind`` "hits" or "aggregate").

    ``shown`` lists the columns a screen must show beyond the context, place and texts (the
    query's ``show`` columns); None shows every column.
    """
    width = max(width, 20)
    names = table.column_names
    columns = _screen_columns(names, kind, shown)
    hidden = [c for c in names if c not in columns]
    total = table.num_rows
    listed = (table if max_rows is None else table.slice(0, max_rows)).to_pylist()   # only what is shown
    cells = [[_one_line(screen_cell(r[c])) for c in columns] for r in listed]
    numeric = {c for c, t in zip(names, table.schema.types) if pa.types.is_integer(t) or pa.types.is_floating(t)}
    lines = _across(columns, cells, numeric, width)
    if lines is None:
        lines = _down(columns, [[screen_cell(r[c]) for c in columns] for r in listed], kind, width)
    noun = ("hit", "hits") if kind == "hits" else ("row", "rows")
    more = total - len(listed)
    if more:
        lines.append(f"{more} more {noun[more != 1]}; use -o FILE or --limit to get them all")
    if hidden:
        lines += textwrap.wrap(f"not shown here: {', '.join(hidden)} (every column is in -o FILE)", width,
                               break_on_hyphens=False)
    lines.append(f"({total} {noun[total != 1]})")
    return "\n".join(line.rstrip() for line in lines)


def _screen_columns(names: list[str], kind: str, shown: Sequence[str] | None) -> list[str]:
    if kind != "hits" or shown is None or not set(CONTEXT) <= set(names):
        return list(names)
    wanted = set(shown) | {"doc", "sentence"} | {c for c in names if c.endswith((".text", ".reading"))}
    return list(CONTEXT) + [c for c in names if c in wanted and c not in CONTEXT]


def _one_line(text: str) -> str:
    return text.replace("\r\n", " ").replace("\n", " ").replace("\r", " ").replace("\t", " ")


def _across(columns: list[str], cells: list[list[str]], numeric: set[str], width: int) -> list[str] | None:
    """One line per row, or None when the columns do not fit at full width."""
    natural = [max([cell_len(c)] + [cell_len(row[i]) for row in cells]) for i, c in enumerate(columns)]
    widths = list(natural)
    over = sum(widths) + len(SEP) * (len(widths) - 1) - width
    # the context first, then the hit (whose nodes' texts have columns of their own)
    for group in (("left", "right"), ("hit",)):
        squeezable = [i for i, c in enumerate(columns) if c in group]
        for i in sorted(squeezable, key=lambda i: -widths[i]):
            if over <= 0:
                break
            floor = min(natural[i], CONTEXT_MIN)
            cut = min(over, widths[i] - floor)
            widths[i] -= cut
            over -= cut
    if over > 0:
        return None
    right = {"left"} | numeric

    def fit(text: str, w: int, align_right: bool, cut_left: bool) -> str:
        if cell_len(text) > w:     # only the context and hit are ever cut: the outer end
            text = "…" + _tail(text, w - 1) if cut_left else _head(text, w - 1) + "…"
        pad = " " * (w - cell_len(text))
        return pad + text if align_right else text + pad

    lines = [SEP.join(fit(c, w, c in right, False) for c, w in zip(columns, widths))]
    lines.append(SEP.join("-" * w for w in widths))
    for row in cells:
        lines.append(SEP.join(fit(row[i], widths[i], columns[i] in right, columns[i] == "left")
                              for i in range(len(columns))))
    return lines


def _head(text: str, w: int) -> str:
    out = ""
    for ch in text:
        if cell_len(out + ch) > w:
            break
        out += ch
    return out


def _tail(text: str, w: int) -> str:
    return _head(text[::-1], w)[::-1]


def _down(columns: list[str], cells: list[list[str]], kind: str, width: int) -> list[str]:
    """One block per row: ``label  value`` lines, values wrapped (never cut) at the width; on
    a screen too narrow for labels beside values, each value goes under its label."""
    label_w = max(cell_len(c) for c in columns)
    beside = width - label_w - 4 >= 12
    value_w = width - label_w - 4 if beside else width - 4
    lines: list[str] = []
    for n, row in enumerate(cells, 1):
        head = f"-- {'hit' if kind == 'hits' else 'row'} {n} "
        lines.append(head + "-" * max(0, width - len(head)))
        for c, value in zip(columns, row):
            parts = [p for line in value.strip().splitlines() or [""]
                     for p in (textwrap.wrap(line, value_w, break_on_hyphens=False) or [""])]
            if beside:
                lines.append(f"  {c.ljust(label_w)}  {parts[0]}")
                lines += [f"  {' ' * label_w}  {p}" for p in parts[1:]]
            else:
                lines.append(f"  {c}")
                lines += [f"    {p}" for p in parts]
    return lines
