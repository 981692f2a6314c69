"""Files the commands write: the format a file's ending names, a folder that must exist, and
writes that either finish or leave nothing behind.

Every command that writes a file (``query -o``, ``export -o``, ``bench --json/--plot``) goes
through :func:`check_writable` before any work, so a typo in a folder name costs a message
and exit code 2 instead of a finished query and a traceback; and through :func:`replaced_when_done`,
so an interrupted or failed write never leaves a half-written file under the name asked for
(an older file of that name stays as it was).

>>> hit_format("hits.CSV", None)
'csv'
>>> hit_format("hits.parquet", "tsv")   # --format wins over the ending
'tsv'
"""
from __future__ import annotations

import contextlib
import os
from pathlib import Path
from typing import Iterator

from engine.errors import StrataError

#: the hit-table formats a file's ending selects
HIT_ENDINGS = {".csv": "csv", ".tsv": "tsv", ".jsonl": "jsonl", ".parquet": "parquet"}
HIT_FORMATS = ("csv", "tsv", "jsonl", "parquet")


def hit_format(path: str | os.PathLike | None, given: str | None) -> str:
    """The format of a hit table: ``given`` if any, else from the ending of ``path``, else the
    screen table ("table", only without a file)."""
    if given is not None:
        fmt = given.lower()
        if fmt == "table":
            if path is not None:
                raise StrataError("the screen table is for the terminal and never goes to a file; "
                                  f"to save every hit, give -o a file ending in {_endings()}")
            return fmt
        if fmt not in HIT_FORMATS:
            raise StrataError(f"unknown output format {given!r}; use table, {', '.join(HIT_FORMATS)}")
        return fmt
    if path is None:
        return "table"
    suffix = Path(path).suffix.lower()
    if suffix not in HIT_ENDINGS:
        said = f"the ending {suffix!r}" if suffix else "no ending"
        raise StrataError(f"cannot tell the output format from {said}: known endings are {_endings()} "
                          "(or give --format)", file=str(path))
    return HIT_ENDINGS[suffix]


def _endings() -> str:
    return ", ".join(HIT_ENDINGS)


def check_writable(path: str | os.PathLike, what: str = "output file") -> Path:
    """Refuse, before any work, a file whose folder is missing or that names a folder."""
    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.exists():
        raise StrataError(f"cannot write the {what}: the folder {str(folder)!r} does not exist", file=str(path))
    if not folder.is_dir():
        raise StrataError(f"cannot write the {what}: {str(folder)!r} is not a folder", file=str(path))
    if path.is_dir():
        raise StrataError(f"cannot write the {what}: it is a folder; name a file in it", file=str(path))
    if not os.access(folder, os.W_OK):
        raise StrataError(f"cannot write the {what}: the folder {str(folder)!r} is not writable", file=str(path))
    return path


@contextlib.contextmanager
def replaced_when_done(path: str | os.PathLike, what: str = "output file") -> Iterator[Path]:
    """A temporary path beside ``path``; on success it becomes ``path``, on any failure it is
    removed and ``path`` is left as it was.  Operating-system errors become StrataError."""
    path = check_writable(path, what)
    tmp = path.with_name(f".{path.name}.{os.getpid()}.part")   # hidden, beside it: os.replace stays on one disk
    try:
        yield tmp
        os.replace(tmp, path)
    except OSError as e:
        tmp.unlink(missing_ok=True)
        raise StrataError(f"cannot write the {what}: {e.strerror or e}", file=str(path)) from None
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
