"""User-facing errors.

A :class:`StrataError` is a mistake in the user's input (a file, a query, an option),
never a bug. It carries the place: ``file`` and ``line`` for input files, or the
query text with a ``(line, column)`` position so the CLI can draw a caret. The CLI
prints ``str(error)`` and exits with code 2; no traceback.
"""
from __future__ import annotations

EXIT_USER_ERROR = 2


class StrataError(Exception):
    """A user mistake, with the place it was found."""

    def __init__(
        self,
        message: str,
        *,
        file: str | None = None,
        line: int | None = None,
        query: str | None = None,
        column: int | None = None,
        hint: str | None = None,
    ) -> None:
        super().__init__(message)
        self.message = message
        self.file = file
        self.line = line
        self.query = query
        self.column = column
        self.hint = hint

    def __str__(self) -> str:
        parts: list[str] = []
        if self.query is not None:
            parts.append(self._query_place())
        elif self.file is not None:
            where = f"{self.file}:{self.line}" if self.line is not None else self.file
            parts.append(f"{where}: {self.message}")
        else:
            parts.append(self.message)
        if self.query is not None:
            parts.append(self.message)
        if self.hint:
            parts.append(self.hint)
        return "\n".join(parts)

    def _query_place(self) -> str:
        """The query line in error with a caret under the column (both 1-based)."""
        lines = self.query.splitlines() or [""]
        line = min(max(self.line or 1, 1), len(lines))
        col = max(self.column or 1, 1)
        text = lines[line - 1]
        return f"query line {line}, column {col}:\n  {text}\n  {' ' * (col - 1)}^"

