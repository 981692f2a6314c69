"""Lines of whitespace-separated fields, the layout of the NIST CTM and RTTM files: read
column-wise (pyarrow), comment lines (``;;``) and blank lines skipped, every line's number kept
for the messages."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from engine.errors import StrataError
from engine.importers.base import line_array, refuse_nul_in, without_bom
from engine.importers.tabular import parse_time, times_fast


def read_fields(path: Path, least: int, most: int, what: str) -> tuple[list[pa.Array], np.ndarray]:
    """The columns (``most`` of them, missing ones null) and each row's line number; a line
    with fewer than ``least`` or more than ``most`` fields is refused at its line."""
    try:
        raw = without_bom(path.read_bytes())
    except OSError as e:
        raise StrataError(f"cannot read: {e.strerror}", file=str(path)) from None
    refuse_nul_in(raw, path)
    line = pc.utf8_trim_whitespace(line_array(raw, path))
    keep = pc.and_(pc.not_equal(line, ""), pc.invert(pc.starts_with(line, ";;")))
    numbers = np.flatnonzero(keep.to_numpy(zero_copy_only=False)) + 1
    if not len(numbers):
        raise StrataError(f"the file is empty: expected lines of {what}", file=str(path), line=1)
    parts = pc.split_pattern_regex(line.filter(keep), r"\s+")
    count = pc.list_value_length(parts).to_numpy(zero_copy_only=False)
    bad = np.flatnonzero((count < least) | (count > most))
    if bad.size:
        k = int(bad[0])
        span = f"{least}" if least == most else f"{least} to {most}"
        raise StrataError(f"this line has {count[k]} fields; {what} has {span}", file=str(path),
                          line=int(numbers[k]))
    flat = parts.flatten()
    offsets = parts.offsets.to_numpy()[:-1]
    cols = []
    for j in range(most):
        here = count > j
        taken = flat.take(pa.array(np.where(here, offsets + j, 0)))
        cols.append(taken if here.all() else pc.if_else(pa.array(here), taken, pa.scalar(None, pa.string())))
    return cols, numbers


def times(values: pa.Array, lines: np.ndarray, path: Path, what: str) -> np.ndarray:
    """Whole microseconds of a column of seconds; a cell that is not a time is named by line."""
    fast = times_fast(values, "s")
    if fast is not None:
        return fast
    return np.array([parse_time(v, "s", path, int(n), what) for v, n in zip(values.to_pylist(), lines)],
                    dtype=np.int64)
