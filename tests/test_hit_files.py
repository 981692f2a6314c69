"""Hit files hold every value of the Arrow result, read back value by value with readers
that are not ours: Python's `csv` module (RFC 4180), pandas (TSV, then the escapes the README
documents), `json` (JSON Lines) and pyarrow (Parquet).

The corpora are the open treebank's first sentences (quotes, commas, non-ASCII dashes and
quotation marks), and its first document with a time tier whose times are written in the
test as decimal text; the exact value of every duration is computed with Python's `decimal`
module from that same text, so a printed time is checked against exact decimal arithmetic.
"""
from __future__ import annotations

import csv
import json
import re
from decimal import Decimal

import pandas as pd
import pyarrow.parquet as pq
import pytest

from engine import Corpus
from engine.screen import MISSING
from tests.conftest import first_gum_document, first_gum_sentences
from tests.test_cli_query import strata

SENTENCES = 60
AWKWARD = 'find t = word(form in [",", "\\"", "“", "”", "–"]) show t.lemma, t.misc, t.feats'
GROUPED = "find t = word count per t.feats.Number, t.upos"        # many words have no Number


@pytest.fixture(scope="module")
def small(tmp_path_factory):
    root = tmp_path_factory.mktemp("hit-files")
    corpus = Corpus.create(root / "corpus")
    corpus.import_files([first_gum_sentences(root, SENTENCES)], progress=False)
    return corpus


TSV_UNESCAPES = {"\\t": "\t", "\\n": "\n", "\\r": "\r", "\\\\": "\\"}


def tsv_unescape(cell: str) -> str:
    """The README's TSV escapes undone, left to right (so ``\\\\t`` is a backslash and a t)."""
    out, i = [], 0
    while i < len(cell):
        pair = cell[i:i + 2]
        if pair in TSV_UNESCAPES:
            out.append(TSV_UNESCAPES[pair])
            i += 2
        else:
            out.append(cell[i])
            i += 1
    return "".join(out)


def same_value(cell: str, value) -> bool:
    """A text cell against the Arrow value: empty for missing, floats read back exactly."""
    if value is None:
        return cell == ""
    if isinstance(value, bool):
        return cell == str(value)
    if isinstance(value, float):
        return float(cell) == value
    if isinstance(value, int):
        return int(cell) == value
    return cell == value


def read_text_rows(path, fmt: str) -> tuple[list[str], list[list[str]]]:
    if fmt == "csv":
        with open(path, encoding="utf-8", newline="") as f:
            rows = list(csv.reader(f))
        return rows[0], rows[1:]
    frame = pd.read_csv(path, sep="\t", quoting=csv.QUOTE_NONE, dtype=str, keep_default_na=False,
                        encoding="utf-8")
    return [tsv_unescape(c) for c in frame.columns], [[tsv_unescape(c) for c in row]
                                                       for row in frame.itertuples(index=False, name=None)]


@pytest.mark.parametrize("query", [AWKWARD, GROUPED])
@pytest.mark.parametrize("fmt", ["csv", "tsv", "jsonl", "parquet"])
def test_every_value_reads_back(small, tmp_path, query, fmt):
    hits = small.query(query)
    want = hits.to_arrow()
    assert want.num_rows > 5
    out = tmp_path / f"hits.{fmt}"
    done = strata("query", str(small.path), query, "-o", str(out))
    assert done.returncode == 0, done.stderr
    if fmt == "parquet":
        back = pq.read_table(out)
        assert back.schema.equals(want.schema) and back.to_pylist() == want.to_pylist()
        return
    if fmt == "jsonl":
        assert [json.loads(line) for line in out.read_text(encoding="utf-8").splitlines()] == want.to_pylist()
        return
    header, rows = read_text_rows(out, fmt)
    assert header == want.column_names and len(rows) == want.num_rows
    for row, expected in zip(rows, want.to_pylist()):
        for name, cell in zip(header, row):
            assert same_value(cell, expected[name]), (name, cell, expected[name])


def test_awkward_text_is_really_there(small):
    """The check above is only worth something if the values hold what a writer gets wrong."""
    rows = small.query(AWKWARD).rows()
    texts = {r["t.text"] for r in rows}
    assert {",", '"', "“", "–"} <= texts
    assert any(r["t.feats"] is None for r in rows) or any(r["t.misc"] is None for r in rows)
    assert any(r["t.feats.Number"] is None for r in small.query(GROUPED).rows())


def test_tabs_and_line_breaks_survive_tsv_through_pandas(tmp_path):
    """No treebank word holds a tab, so a table of awkward strings stands in for one."""
    import pyarrow as pa
    from engine.results import Hits
    awkward = ["plain", "tab\there", "two\nlines", "cr\rhere", "back\\slash", "back\\tslash", '"quoted"',
               "naïve – “dashes”", "", None]
    table = pa.table({"text": awkward, "n": list(range(len(awkward)))})
    path = Hits(table).to_tsv(tmp_path / "h.tsv")
    header, rows = read_text_rows(path, "tsv")
    assert header == ["text", "n"]
    assert [r[0] for r in rows] == [v if v is not None else "" for v in awkward]
    assert [int(r[1]) for r in rows] == list(range(len(awkward)))


def test_missing_values_by_format(small, tmp_path):
    """(missing) on screen; an empty CSV cell; a Parquet null."""
    hits = small.query(GROUPED)
    missing = [r for r in hits.rows() if r["t.feats.Number"] is None]
    assert missing
    shown = hits.render_table(width=200, max_rows=None)
    assert shown.count(MISSING) >= len(missing)
    csv_rows = list(csv.reader(open(hits.to_csv(tmp_path / "h.csv"), encoding="utf-8", newline="")))
    col = csv_rows[0].index("t.feats.Number")
    assert sum(1 for r in csv_rows[1:] if r[col] == "") == len(missing)
    back = pq.read_table(hits.to_parquet(tmp_path / "h.parquet"))
    assert back.column("t.feats.Number").null_count == len(missing)


# ---- times: every digit, and no binary noise ------------------------------------------

BASE_MS = 123_456_789          # 123456.789 s: more than 6 significant digits
STEPS_MS = [137, 186, 1_814, 3, 250, 999, 1_001, 42]


@pytest.fixture(scope="module")
def timed(tmp_path_factory):
    """The first treebank document with a token tier; returns (corpus, {form: (start, end)} texts)."""
    root = tmp_path_factory.mktemp("timed")
    corpus, _ = first_gum_document(root)
    doc = corpus.store.documents()[0]
    con = corpus.connect()
    forms = [f for (f,) in con.execute("""SELECT w.form FROM token w JOIN word t ON t.ord = w.word_first
                                           WHERE t.upos <> 'PUNCT' ORDER BY w.ord LIMIT 40""").fetchall()]
    con.close()
    rows, times, t = [], [], BASE_MS
    for i, form in enumerate(forms):
        d = STEPS_MS[i % len(STEPS_MS)]
        start, end = f"{Decimal(t) / 1000}", f"{Decimal(t + d) / 1000}"
        rows.append(f"{doc.name}\tspoken\t{start}\t{end}\t{form.lower()}\n")
        times.append((start, end))
        t += d + (7 if i % 3 else 0)
    tiers = root / "w.tiers.tsv"
    tiers.write_text("doc\ttier\tstart\tend\tlabel\n" + "".join(rows), encoding="utf-8")
    corpus.import_files([tiers], progress=False)
    return corpus, times


TIMES = "find w = spoken show w.start, w.end, w.duration"


def test_durations_are_the_exact_decimal_differences(timed, tmp_path):
    corpus, times = timed
    out = tmp_path / "t.csv"
    done = strata("query", str(corpus.path), TIMES, "-o", str(out))
    assert done.returncode == 0, done.stderr
    with open(out, encoding="utf-8", newline="") as f:
        rows = list(csv.DictReader(f))
    assert [(r["w.start"], r["w.end"]) for r in rows] == times          # the file's own text
    # Decimal subtraction is exact: the CSV cell is that decimal, not 1.1859999999999786
    assert [Decimal(r["w.duration"]) for r in rows] == [Decimal(e) - Decimal(s) for s, e in times]
    assert all(len(r["w.duration"]) <= 6 for r in rows)


def test_gaps_are_the_exact_decimal_differences(timed, tmp_path):
    corpus, times = timed
    query = "find a = spoken, b = spoken where a directly precedes b show gap(a, b)"
    hits = corpus.query(query)
    want = [Decimal(b[0]) - Decimal(a[1]) for a, b in zip(times, times[1:])]
    assert [Decimal(repr(v)) for v in hits.to_arrow().column("gap(a, b)").to_pylist()] == want



def test_the_screen_keeps_every_digit(timed):
    corpus, times = timed
    done = strata("query", str(corpus.path), TIMES)
    assert done.returncode == 0, done.stderr
    assert times[0][0] == "123456.789"
    shown = set(re.findall(r"(?<![\d.])\d+\.\d+(?![\d.])", done.stdout))    # every decimal on screen
    listed = times[:50]
    assert {t for pair in listed for t in pair} <= shown     # each start and end, every digit
    assert "123457" not in re.findall(r"(?<![\d.])\d+(?![\d.])", done.stdout)   # no rounded form


def test_a_listing_gives_each_timed_node_its_time_span(timed, tmp_path):
    corpus, times = timed
    out = tmp_path / "t.csv"
    done = strata("query", str(corpus.path), "find w = spoken", "-o", str(out))
    assert done.returncode == 0, done.stderr
    with open(out, encoding="utf-8", newline="") as f:
        rows = list(csv.DictReader(f))
    assert [(r["w.start"], r["w.end"]) for r in rows] == times
    assert all(r["w.doc"] == r["doc"] and r["w.node"] for r in rows)
