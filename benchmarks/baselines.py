"""What a strata query is measured against, besides the hand-written SQL.

Why: a ratio to hand SQL says what the query language costs; it does not say whether the
engine is fast. Two more yardsticks, run in the same process on the same files:

* the scan floor (``NAME.floor.sql``): one pass over exactly the columns the query must read,
  hashed so DuckDB cannot skip them. No plan can be much faster than that;
* a pandas script (``NAME.pandas.py``, ``run(layers) -> rows``) written as a practitioner
  would without strata: read the needed Parquet columns, filter, merge (``merge_asof`` for
  ranges), group. Its time includes reading the Parquet files, as every strata query reads
  them too (both from the operating system's file cache after the first run).

Rows from every side are compared as multisets of text values (floats to 9 significant
digits, since summation order differs between engines).
"""
from __future__ import annotations

import importlib.util
import math
import threading
import time
from pathlib import Path
from typing import Callable

from engine.errors import StrataError


class BaselineError(StrataError):
    """A suite file that cannot be used (a pandas script without ``run``, a syntax error)."""


class ParquetLayers:
    """The ``layers`` argument of a pandas script: reads a layer's Parquet parts with pandas.

    ``read_seconds`` adds up the time spent reading, so the report can show it apart.
    """

    def __init__(self, store) -> None:
        self.store = store
        self.read_seconds = 0.0

    def read(self, layer: str, columns: list[str]):
        import pandas as pd

        paths = self.store.part_paths(layer)
        if not paths:
            raise StrataError(f"layer {layer!r} has no rows in this corpus")
        t0 = time.perf_counter()
        frames = [pd.read_parquet(p, columns=columns) for p in paths]
        df = frames[0] if len(frames) == 1 else pd.concat(frames, ignore_index=True)
        self.read_seconds += time.perf_counter() - t0
        return df


def load_pandas_script(path: Path) -> Callable:
    """The ``run`` function of a ``NAME.pandas.py`` file (not importable by name: it has dots)."""
    spec = importlib.util.spec_from_file_location(f"strata_bench_{path.stem.replace('.', '_')}", path)
    module = importlib.util.module_from_spec(spec)
    try:
        spec.loader.exec_module(module)
    except SyntaxError as e:
        raise BaselineError(f"syntax error in the pandas script: {e.msg}", file=str(path), line=e.lineno) from None
    run = getattr(module, "run", None)
    if not callable(run):
        raise BaselineError("the pandas script has no function run(layers)", file=str(path))
    return run


def _cell(v) -> str:
    """One value as comparable text: NULL/NaN empty, integers plain, floats to 9 digits."""
    if v is None:
        return ""
    try:
        import pandas as pd
        if v is pd.NA or v is pd.NaT:
            return ""
    except ImportError:  # pragma: no cover - pandas is a bench dependency
        pass
    if isinstance(v, bool):
        return str(v)
    if hasattr(v, "item") and not isinstance(v, (str, bytes)):   # numpy scalars
        v = v.item()
    if isinstance(v, float):
        if math.isnan(v):
            return ""
        if v.is_integer() and abs(v) < 1e15:
            return str(int(v))
        return f"{v:.9g}"
    return str(v)


def comparable_rows(rows) -> list[tuple[str, ...]]:
    """Rows from DuckDB, strata hits or pandas (list of tuples or a DataFrame), order ignored."""
    if hasattr(rows, "itertuples"):
        rows = rows.itertuples(index=False, name=None)
    return sorted(tuple(_cell(v) for v in row) for row in rows)


class PeakRss:
    """Peak resident memory of this process above its level at the start, sampled every 2 ms.

    Why sampling: tracemalloc does not see DuckDB's allocations and slows pandas down; the
    kernel's own peak (ru_maxrss) never goes down, so it cannot be split by query. A spike
    shorter than the interval is missed, and memory DuckDB keeps cached from an earlier
    query is not counted again: the figure is a lower bound.
    """

    STATM = Path("/proc/self/statm")

    def __init__(self, interval: float = 0.002) -> None:
        self.interval = interval
        self.peak_bytes: int | None = None
        self._stop = threading.Event()
        self._thread: threading.Thread | None = None
        self._page = 4096
        try:
            import os
            self._page = os.sysconf("SC_PAGE_SIZE")
        except (ValueError, OSError, AttributeError):  # pragma: no cover - not Linux
            pass

    def _rss(self) -> int | None:
        try:
            return int(self.STATM.read_text().split()[1]) * self._page
        except (OSError, IndexError, ValueError):
            return None

    def __enter__(self) -> "PeakRss":
        start = self._rss()
        if start is None:
            return self
        self._start, self._max = start, start

        def sample() -> None:
            while not self._stop.is_set():
                now = self._rss() or 0
                if now > self._max:
                    self._max = now
                self._stop.wait(self.interval)

        self._thread = threading.Thread(target=sample, daemon=True)
        self._thread.start()
        return self

    def __exit__(self, *exc) -> None:
        if self._thread is None:
            return
        self._stop.set()
        self._thread.join()
        self._max = max(self._max, self._rss() or 0)
        self.peak_bytes = self._max - self._start


def timed(fn: Callable[[], object], runs: int, warmup: bool = True) -> tuple[list[float], object, int | None]:
    """Seconds of each of ``runs`` calls, the last result and the highest memory peak seen.

    One untimed call first, for every side alike: the first side timed for a query used to
    come right after the previous query's pandas run, with caches and the allocator in its
    wake (02 at 10^6 tokens: 46 ms cold against 28 ms warm for the same statement).
    """
    times, result, peak = [], None, None
    if warmup:
        fn()
    for _ in range(runs):
        with PeakRss() as mem:
            t0 = time.perf_counter()
            result = fn()
            times.append(time.perf_counter() - t0)
        if mem.peak_bytes is not None:
            peak = max(peak or 0, mem.peak_bytes)
    return times, result, peak


def timed_pair(fa: Callable[[], object], fb: Callable[[], object], runs: int
               ) -> tuple[tuple[list[float], object, int | None], tuple[list[float], object, int | None]]:
    """:func:`timed` for two sides whose ratio is reported, their calls alternating (a, b, a, b, ...)
    after one untimed call each: both meet the same state of the machine. Timed one side after
    the other, the side timed first paid for the state the previous query left (02 at 10^6,
    first in a process: 50 ms against 35 for the same statement timed later)."""
    out = []
    for f in (fa, fb):
        f()
    results: list[list] = [[[], None, None], [[], None, None]]
    for _ in range(runs):
        for side, f in ((0, fa), (1, fb)):
            t, res, peak = timed(f, 1, warmup=False)
            acc = results[side]
            acc[0] += t
            acc[1] = res
            if peak is not None:
                acc[2] = max(acc[2] or 0, peak)
    for acc in results:
        out.append((acc[0], acc[1], acc[2]))
    return out[0], out[1]


def strip_output(query: str) -> str:
    """The query as a plain hit listing: comments and a final count/mean/... clause removed.

    Used to time "the first 20 hits" of every suite query, also of those that aggregate.
    """
    import re

    lines = [line.split("#", 1)[0] if not _in_string(line) else line for line in query.splitlines()]
    text = " ".join(part.strip() for part in lines if part.strip())
    return re.sub(r"\s+(count\b.*|rate\b.*|(mean|min|max|sum|median|stdev|quantile)\s*\(.*)$", "", text)


def _in_string(line: str) -> bool:
    """True when a # on the line may sit inside a quoted value (then the line is kept whole)."""
    head = line.split("#", 1)[0]
    return head.count('"') % 2 == 1

