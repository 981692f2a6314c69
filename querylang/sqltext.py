"""Small pieces of SQL text shared by the compiler's modules: the views a statement reads,
quoted identifiers, times in seconds, one-line text, the WITH clause.

Every identifier in the SQL comes from the catalog through :func:`ident`; every value is a
bound parameter (``sb.param``), so no text of the query ever lands in the SQL.
"""
from __future__ import annotations

SENTENCE_VIEW = "sentence"
DOC_VIEW = "doc"
DOCUMENTS_VIEW = "documents"


def ident(name: str) -> str:
    """A double-quoted SQL identifier (names come from the catalog only).

    >>> ident('feats.Number'), ident('a"b')
    ('"feats.Number"', '"a""b"')
    """
    return '"' + name.replace('"', '""') + '"'


def to_seconds(us_sql: str) -> str:
    """Whole microseconds as seconds, for the hit table only."""
    return f"({us_sql} / 1000000.0)"


def one_line(sb, text_sql: str) -> str:
    """SQL for the text with every line break (CRLF, LF, CR) made one space (bound parameters:
    the SQL text holds no literal)."""
    return f"regexp_replace({text_sql}, {sb.param(chr(13) + chr(10) + '|' + chr(13) + '|' + chr(10))}, {sb.param(' ')}, {sb.param('g')})"


def with_(ctes: list[str], recursive: bool) -> str:
    """The WITH clause; RECURSIVE only when a walk needs it (it changes nothing else)."""
    return f"WITH {'RECURSIVE ' if recursive else ''}{', '.join(ctes)}"
