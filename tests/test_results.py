"""Hit table exports, each read back with an independent reader of its format."""
from __future__ import annotations

import csv
import json

import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from engine.execute import run_query
from engine.results import Hits
from tests.querylang_corpus import ferry_corpus

AWKWARD = ['plain', 'with, comma', 'with "quotes"', 'two\nlines', 'tab\there', 'back\\slash', '', None]


@pytest.fixture()
def hits() -> Hits:
    table = pa.table({"text": AWKWARD, "n": list(range(len(AWKWARD))),
                      "x": [0.1, 1 / 3, 2.5, None, 1e-9, 7.0, -1.0, 3.25]})
    return Hits(table)


def test_csv_is_rfc4180(tmp_path, hits):
    path = hits.to_csv(tmp_path / "h.csv")
    raw = path.read_bytes()
    # RFC 4180 §2: records end in CRLF; fields with comma, quote or line break are quoted,
    # quotes inside doubled
    assert raw.startswith(b"text,n,x\r\n")
    assert b'"with, comma"' in raw and b'"with ""quotes"""' in raw and b'"two\nlines"' in raw
    with path.open(newline="", encoding="utf-8") as f:
        back = list(csv.reader(f))          # Python's csv module as the reference reader
    assert back[0] == ["text", "n", "x"]
    assert [r[0] for r in back[1:]] == [v if v is not None else "" for v in AWKWARD]
    assert [float(r[2]) if r[2] else None for r in back[1:]] == hits.to_arrow().column("x").to_pylist()


def test_tsv_escapes(tmp_path, hits):
    path = hits.to_tsv(tmp_path / "h.tsv")
    lines = path.read_text(encoding="utf-8").split("\n")
    assert lines[-1] == "" and len(lines) == len(AWKWARD) + 2       # no raw newline inside a field
    cells = [line.split("\t") for line in lines[1:-1]]
    assert all(len(c) == 3 for c in cells)                          # no raw tab inside a field
    unescape = {"\\t": "\t", "\\n": "\n", "\\r": "\r", "\\\\": "\\"}

    def undo(s: str) -> str:
        out, i = [], 0
        while i < len(s):
            if s[i] == "\\" and s[i:i + 2] in unescape:
                out.append(unescape[s[i:i + 2]]); i += 2
            else:
                out.append(s[i]); i += 1
        return "".join(out)
    assert [undo(c[0]) for c in cells] == [v if v is not None else "" for v in AWKWARD]


def test_jsonl_and_parquet_round_trip(tmp_path, hits):
    lines = hits.to_jsonl(tmp_path / "h.jsonl").read_text(encoding="utf-8").splitlines()
    assert [json.loads(line) for line in lines] == hits.to_arrow().to_pylist()
    back = pq.read_table(hits.to_parquet(tmp_path / "h.parquet"))
    assert back.equals(hits.to_arrow())


def test_pandas_len_and_repr(hits):
    assert len(hits) == len(AWKWARD)
    df = hits.to_pandas()
    assert list(df.columns) == ["text", "n", "x"] and len(df) == len(AWKWARD)
    shown = repr(hits)
    assert "text" in shown and f"({len(AWKWARD)} hits)" in shown


@pytest.mark.parametrize("width", [30, 60, 120])
def test_render_table_fits_the_width_and_keeps_the_show_column(width):
    con, cat = ferry_corpus()
    hits = run_query(con, cat, 'find w = token(form = "ferry") show w.sentence.speaker')
    out = hits.render_table(width)
    lines = out.splitlines()
    assert all(len(line) <= width for line in lines)
    assert lines[-1] == f"({len(hits)} hits)"
    assert sum(1 for line in lines if "ferry" in line) >= len(hits)
    # the show column is never left out, whatever the width
    assert "w.sentence.speaker" in out and "w.sentence.speaker" not in out.split("not shown here")[-1]
    for speaker in (r["w.sentence.speaker"] for r in hits.rows()):
        assert speaker in out


def test_render_table_of_an_aggregate():
    con, cat = ferry_corpus()
    out = run_query(con, cat, "find t = word count per t.upos").render_table(80)
    assert out.splitlines()[0].split() == ["t.upos", "count"]
