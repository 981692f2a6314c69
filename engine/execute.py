"""Run a query: compile it through querylang's passes, execute the SQL on DuckDB, return Hits.

A listing with a limit whose hits each lie in one document (the planner's decision, carried
as ``SqlQuery.window``) runs on a window of the first documents, widened x8 until it has
the limit's rows; past half of the text one unwindowed run is cheaper and takes over.

The connection must already have the views of DEVELOPERS.md (one per layer and edge set,
``documents`` and ``doc``).  Errors in the query are StrataError; a DuckDB error caused by
the user's input (a regular expression DuckDB's RE2 refuses, a value that does not cast)
is also turned into a StrataError, so the command line never shows a traceback.
"""
from __future__ import annotations

import re
import signal
import threading
import time
import warnings
from dataclasses import dataclass

import duckdb
import pyarrow as pa

from engine.errors import StrataError
from engine.results import Hits
from engine.value_notes import value_notes
from querylang.ast import Query, Show
from querylang.catalog import Catalog
from querylang.compiler import effective_limit
from querylang.sqltext import DOCUMENTS_VIEW, ident
from querylang.pipeline import Compilation, run_passes


@dataclass(frozen=True)
class CompiledQuery:
    """A query ready to run: its AST, the SQL text, the bound parameters, result columns."""

    text: str
    state: Compilation

    @property
    def ast(self) -> Query:
        return self.state.checked.query

    @property
    def sql(self) -> str:
        return self.state.sql.sql

    @property
    def params(self) -> list[object]:
        return list(self.state.sql.params)

    @property
    def columns(self) -> list[str]:
        return list(self.state.sql.columns)

    @property
    def kind(self) -> str:
        return self.state.sql.kind

    def explain_text(self, con: duckdb.DuckDBPyConnection | None = None) -> str:
        """What each pass made of the query: variables, join order with estimates, SQL, parameters.

        With a connection, DuckDB's own physical plan follows (the joins it chose).
        """
        st = self.state
        lines = ["query:", *("  " + line for line in self.text.strip().splitlines()), "", "variables:"]
        for var, info in st.checked.layers.items():
            est = st.plan.estimates.get(var, 0.0)
            lines.append(f"  {var} = {info.name} ({info.kind}, {info.rows} rows, ~{est:.0f} after its tests)")
        for i, inner in enumerate(st.checked.inner_layers):
            for var, info in inner.items():
                lines.append(f"  {var} = {info.name} (without clause {i + 1}: must not exist)")
        lines += ["", "join order: " + " -> ".join(st.plan.order),
                  "qualifiers: " + (", ".join(sorted(st.checked.query.qualifiers)) or "none"),
                  f"result: {self.kind}, columns: {', '.join(self.columns)}"]
        window = st.sql.window
        if st.sql.locality and window is None and st.plan.document_local:
            lines.append(f"limit: none given; a listing with one is {st.sql.locality}")
        elif st.sql.locality:
            lines.append(f"limit: {st.sql.locality}")
        if window is not None:
            lines.append(f"  first window: the documents of ~{WINDOW_CANDIDATES_PER_HIT} x limit candidates of "
                         f"{window.anchor}, then x{WINDOW_GROWTH}; past {WINDOW_MAX_SHARE:.0%} of the text "
                         f"the plain statement")
        lines += ["", "sql:"]
        lines += ["  " + part for part in _pretty_sql(self.sql)]
        lines += ["", "parameters:"]
        lines += [f"  ${i + 1} = {p!r}" for i, p in enumerate(self.params)] or ["  none"]
        if window is not None:
            lines += ["", f"windowed sql (${window.doc_lo + 1} <= doc < ${window.doc_hi + 1}, "
                          f"limit ${window.limit + 1} = rows still wanted):"]
            lines += ["  " + part for part in _pretty_sql(window.sql)]
        if con is not None:
            try:
                cur = _cursor(con)
                rows = cur.execute("EXPLAIN " + self.sql, self.params).fetchall()
                cur.close()
            except duckdb.Error as err:
                rows = [("", f"(DuckDB could not plan it: {_first_line(err)})")]
            lines += ["", "duckdb plan:"] + ["  " + line for row in rows for line in str(row[-1]).splitlines()]
        return "\n".join(lines)


def _pretty_sql(sql: str) -> list[str]:
    """One clause per line, for reading (the SQL holds no literals, so no quoting to respect)."""
    broken = re.sub(r" (ASOF LEFT JOIN|LEFT JOIN|FROM|WHERE|ORDER BY|GROUP BY|LIMIT) ", r"\n\1 ", sql)
    return [line.rstrip() for line in broken.splitlines()]


def compile_query(text: str, catalog: Catalog, *, limit: int | None = None, context: int = 5,
                  cross_sentences: bool = False) -> CompiledQuery:
    """Parse, check, plan and translate ``text``; raises StrataError on any mistake in it."""
    if context < 0:
        raise StrataError("context must be 0 or more tokens")
    if limit is not None and limit < 0:
        raise StrataError("limit must not be negative")
    return CompiledQuery(text, run_passes(text, catalog, limit=limit, context=context,
                                          cross_sentences=cross_sentences))


def run_query(con: duckdb.DuckDBPyConnection, catalog: Catalog, text: str, *,
              limit: int | None = None, context: int = 5, cross_sentences: bool = False,
              timeout: float | None = None, memory: str | None = None) -> Hits:
    """Every match of ``text`` in document order (or the aggregate it asks for).

    ``timeout``: seconds before the query is stopped (a StrataError); ``memory``: DuckDB's
    memory limit for it (``"2GB"``; the connection's own otherwise, see Store.connect).
    """
    if memory is not None and not MEMORY_SIZE.fullmatch(memory.strip()):
        raise StrataError(f"--memory {memory!r} is not a size", hint="write e.g. --memory 2GB or --memory 512MB")
    if timeout is not None and timeout <= 0:
        raise StrataError(f"--timeout {timeout:g} is not a time limit", hint="give seconds above 0, e.g. --timeout 30")
    compiled = compile_query(text, catalog, limit=limit, context=context, cross_sentences=cross_sentences)
    rounds: list[tuple[int, int, int]] = []
    deadline = None if timeout is None else time.monotonic() + timeout
    try:
        if memory is not None:
            con.execute("SET memory_limit = $1", [memory])
        limit_now = con.execute("SELECT current_setting('memory_limit')").fetchone()[0]
        if compiled.state.sql.window is not None:
            table, rounds = _run_windowed(con, compiled, deadline)
        else:
            table = _fetch_arrow(con, compiled.sql, compiled.params, deadline)
    except QueryTimeout:
        raise StrataError(f"the query ran past its time limit of {timeout:g} s and was stopped",
                          hint="allow it longer with --timeout SECONDS, or narrow the query") from None
    except duckdb.OutOfMemoryException as err:
        raise StrataError(f"the query needs more memory than its limit of {limit_now} "
                          f"({_first_line(err)})",
                          hint="raise the limit with --memory (e.g. --memory 8GB), or narrow the query") from None
    except duckdb.Error as err:   # e.g. a value that does not cast; never a traceback
        line, column = db_error_place(text, str(err))
        raise StrataError(f"the query could not run on this corpus: {_first_line(err)}", query=text,
                          line=line, column=column,
                          hint=None if column else "(the database did not say where; the caret is at the start)"
                          ) from None
    table = table.rename_columns(compiled.columns)
    output = compiled.ast.output
    shown = tuple(i.label for i in output.items) if isinstance(output, Show) else ()
    notes = _notes(compiled, table, limit) + value_notes(con, catalog, compiled.state.checked)
    return Hits(table, compiled.kind, text, compiled.sql, tuple(rounds), shown, notes)


_DB_COLUMN = re.compile(r'column "?([A-Za-z_][\w.]*)"?')
_DB_VALUE = re.compile(r"'([^']{1,200})'|\"([^\"]{1,200})\"")


def db_error_place(text: str, message: str) -> tuple[int, int | None]:
    r"""``(line, column)`` (1-based) of the part of the query a database error is about, where
    the message names it: a column ("... from source column feats" -> the first ``.feats``),
    or a quoted value that the query also holds.  ``(1, None)`` when it cannot be told.

    >>> db_error_place('find w = word where w.feats = "x"', "Could not convert ... source column feats")
    (1, 21)
    >>> db_error_place('find w = word\nwhere w.form ~ "(("', "Invalid Input Error: ... '((' ...")
    (2, 16)
    >>> db_error_place("find w = word count", "Out of Range Error")
    (1, None)
    """
    offset = None
    for m in _DB_COLUMN.finditer(message):
        name = m.group(1).split(".")[-1]
        found = re.search(r"\b([A-Za-z_][\w\-]*)\.(?:[\w\-]+\.)*" + re.escape(name) + r"\b", text)
        if found:
            offset = found.start()
            break
    if offset is None:
        for m in _DB_VALUE.finditer(message):
            value = m.group(1) or m.group(2)
            at = text.find(f'"{value}"')
            if at >= 0:
                offset = at
                break
    if offset is None:
        return 1, None
    line = text.count("\n", 0, offset) + 1
    return line, offset - (text.rfind("\n", 0, offset) + 1) + 1


def _notes(compiled: CompiledQuery, table: pa.Table, limit: int | None) -> tuple[str, ...]:
    """What the user should know about the result beside its rows."""
    q = compiled.ast
    every = effective_limit(q.limit, limit)
    if (q.sample is not None and compiled.kind == "hits" and table.num_rows < q.sample.size
            and (every is None or table.num_rows < every)):
        return (f"sample {q.sample.size} asked for, but the query has {table.num_rows} hit{'' if table.num_rows == 1 else 's'}: all of them are listed",)
    return ()


WINDOW_CANDIDATES_PER_HIT = 4   # rule of thumb: candidates of the most selective variable per wanted hit
WINDOW_GROWTH = 8
WINDOW_MAX_SHARE = 0.5          # a window reaching past this share of the text: run unwindowed instead


def _run_windowed(con: duckdb.DuckDBPyConnection, compiled: CompiledQuery,
                  deadline: float | None = None) -> tuple[pa.Table, list]:
    """The first ``limit`` hits from growing windows of documents, or from the plain statement.

    Windows are consecutive document ranges ``[lo, hi)``: their hits are disjoint and each
    window's hits come after the previous window's in the full order (documents own disjoint,
    increasing ranges of the global line), so concatenation keeps the order and the LIMIT of
    each window asks only for the rows still missing.  Returns the table and the windows run
    as ``(first doc, end doc, rows)``; none when the plain statement answered.
    """
    sql = compiled.state.sql
    window = sql.window
    assert window is not None and sql.limit_param is not None
    want = int(sql.params[sql.limit_param])
    docs = _documents_in_order(con)
    if docs is None:
        return _fetch_arrow(con, compiled.sql, compiled.params, deadline), []
    numbers = [d for d, _ in docs]
    cumulative = [0]
    for _, length in docs:
        cumulative.append(cumulative[-1] + length + 1)
    total = cumulative[-1]
    estimate = max(compiled.state.plan.estimates.get(window.anchor, 1.0), 1.0)
    share = WINDOW_CANDIDATES_PER_HIT * want / estimate
    tables: list[pa.Table] = []
    rounds: list[tuple[int, int, int]] = []
    found, lo = 0, 0
    while True:
        hi = lo + 1
        while hi < len(docs) and cumulative[hi] - cumulative[lo] < share * total:
            hi += 1
        if cumulative[hi] > WINDOW_MAX_SHARE * total:
            # also the way out before the last document: hits without any start sort last
            return _fetch_arrow(con, compiled.sql, compiled.params, deadline), []
        params = list(window.params)
        params[window.doc_lo], params[window.doc_hi] = numbers[lo], numbers[hi]
        params[window.limit] = want - found
        table = _fetch_arrow(con, window.sql, params, deadline)
        tables.append(table)
        rounds.append((numbers[lo], numbers[hi], table.num_rows))
        found += table.num_rows
        if found >= want:
            return pa.concat_tables(tables), rounds
        lo, share = hi, share * WINDOW_GROWTH


def _documents_in_order(con: duckdb.DuckDBPyConnection) -> list[tuple[int, int]] | None:
    """(doc, length) by document number, or None when bases do not grow with the number
    (windows by number would then not follow the hit order)."""
    cur = _cursor(con)
    try:
        rows = cur.execute(f"SELECT doc, base, length FROM {ident(DOCUMENTS_VIEW)} ORDER BY doc").fetchall()
    finally:
        cur.close()
    if not rows or any(b[1] <= a[1] for a, b in zip(rows, rows[1:])):
        return None
    return [(doc, length) for doc, _, length in rows]


def _cursor(con: duckdb.DuckDBPyConnection) -> duckdb.DuckDBPyConnection:
    """A separate cursor on the same database, so an unfinished result of the caller's
    connection cannot block the query; Python variables never stand in for missing views."""
    cur = con.cursor()
    cur.execute("SET python_enable_replacements = false")
    return cur


def _fetch_arrow(con: duckdb.DuckDBPyConnection, sql: str, params: list[object],
                 deadline: float | None = None):
    """Run and fetch as Arrow, in a worker thread the caller waits for.

    Ctrl-C: while the query runs, SIGINT goes to a handler of ours that stops it with the
    cursor's ``interrupt()`` (DuckDB checks for it between chunks of work); the wait then
    ends at once and KeyboardInterrupt goes on up.  Python's own handler left in place lost
    the worker's call and left the connection marked busy, and without a worker the query
    ignored Ctrl-C.  Past ``deadline`` (``time.monotonic()``) the query is stopped the same way
    and :class:`QueryTimeout` raised.

    ``execute(...).to_arrow_table()`` is ~3 ms faster per query than the relational
    ``sql(...)`` path (it binds once; measured on the suite's smallest queries), at the
    price of one copy of the result, which DuckDB warns about; the warning is silenced here.
    """
    cur = _cursor(con)
    box: dict[str, object] = {}

    def work() -> None:
        try:
            with warnings.catch_warnings():
                warnings.filterwarnings("ignore", message="Arrow output on a DB-API result")
                box["table"] = cur.execute(sql, params).to_arrow_table()
        except BaseException as err:            # handed to the waiting thread
            box["error"] = err

    def stop(signum, frame) -> None:
        box["interrupted"] = True
        cur.interrupt()

    main = threading.current_thread() is threading.main_thread()
    previous = signal.signal(signal.SIGINT, stop) if main else None
    worker = threading.Thread(target=work, name="strata-query", daemon=True)
    try:
        worker.start()
        worker.join(None if deadline is None else max(deadline - time.monotonic(), 0.0))
        if worker.is_alive():                   # past the deadline
            box["timeout"] = True
            cur.interrupt()
            worker.join()
    finally:
        if main:
            signal.signal(signal.SIGINT, previous)
    cur.close()
    if box.get("interrupted"):
        raise KeyboardInterrupt
    if box.get("timeout"):
        raise QueryTimeout()
    if "error" in box:
        raise box["error"]
    return box["table"]


#: a size as DuckDB's memory_limit takes it
MEMORY_SIZE = re.compile(r"\d+(\.\d+)?\s*([KMGT]i?B|B)", re.IGNORECASE)


class QueryTimeout(Exception):
    """The query ran past its time limit (turned into a StrataError by run_query)."""


def _first_line(err: Exception) -> str:
    return str(err).strip().splitlines()[0] if str(err).strip() else type(err).__name__
