"""`strata query` and `strata explain` as a user runs them: a child process, its output and
exit code, on a small corpus made from the first sentences of the open treebank's dev split
(written to a temporary folder, never into the repository).

Output formats are read back with independent readers: Python's `csv` module for RFC 4180,
`json` for JSON Lines, `pyarrow.parquet` for Parquet; the expected rows come from the Python
API (`Corpus.query`) on the same corpus.
"""
from __future__ import annotations

import csv
import io
import json
import os
import re
import subprocess
import sys

import pyarrow.parquet as pq
import pytest

from tests.conftest import first_gum_sentences

SENTENCES = 60          # enough to hold a comma and a double-quote word (sentence 55 of dev)
HOSTILE = "x'; DROP TABLE documents; --"


def strata(*args: str, stdin: str | None = None) -> subprocess.CompletedProcess:
    """Run the command in a child process, as from a pipe (no terminal, no COLUMNS)."""
    env = {k: v for k, v in os.environ.items() if k not in ("COLUMNS", "LINES", "FORCE_COLOR")}
    return subprocess.run([sys.executable, "-m", "engine.cli", *args], input=stdin, capture_output=True,
                          text=True, encoding="utf-8", env=env, timeout=120)


@pytest.fixture(scope="module")
def small(tmp_path_factory):
    """(corpus path, Corpus) built with `strata init` and `strata import`."""
    from engine import Corpus
    root = tmp_path_factory.mktemp("cli-query")
    source = first_gum_sentences(root, SENTENCES)
    path = root / "corpus"
    for args in (("init", str(path)), ("import", str(path), str(source))):
        done = strata(*args)
        assert done.returncode == 0, done.stderr
    return str(path), Corpus.open(path)


COMMAS = 'find t = word(form = ",") show t.lemma'
QUOTES = 'find t = word(form = "\\"") show t.lemma'


def cells(rows: list[dict], columns: list[str]) -> list[list[str]]:
    """Rows as the text a CSV reader gives back: empty for no value, repr for floats."""
    def cell(v):
        return "" if v is None else repr(v) if isinstance(v, float) else str(v)
    return [[cell(r[c]) for c in columns] for r in rows]


# ---- output formats --------------------------------------------------------------------

def test_table_on_stdout(small):
    path, corpus = small
    done = strata("query", path, 'find t = word(upos = "NOUN")')
    assert done.returncode == 0, done.stderr
    lines = done.stdout.splitlines()
    n = len(corpus.query('find t = word(upos = "NOUN")'))
    assert n > 50 and lines[-1] == f"({n} hits)"
    assert f"{n - 50} more hits; use -o FILE or --limit to get them all" in lines
    assert any(line.startswith("not shown here: t.doc") for line in lines)   # the columns only files hold
    # rich's console is 80 columns wide when stdout is not a terminal (its documented default,
    # quoted from memory)
    assert all(len(line) <= 80 for line in lines)


def test_limit_lists_that_many_hits_on_screen(small):
    path, corpus = small
    done = strata("query", path, 'find t = word(upos = "NOUN")', "--limit", "70")
    assert done.returncode == 0, done.stderr
    assert done.stdout.splitlines()[-1] == "(70 hits)" and "more hits" not in done.stdout
    first70 = corpus.query('find t = word(upos = "NOUN")', limit=70).rows()
    assert done.stdout.count("-- hit ") == 70 or len(done.stdout.splitlines()) >= 72
    for r in first70:
        assert r["sentence"] in done.stdout


@pytest.mark.parametrize("query", [COMMAS, QUOTES])
def test_csv_file_is_rfc_4180(small, tmp_path, query):
    path, corpus = small
    out = tmp_path / "hits.csv"
    done = strata("query", path, query, "--format", "csv", "-o", str(out))
    assert done.returncode == 0, done.stderr
    raw = out.read_bytes().decode("utf-8")
    hits = corpus.query(query)
    parsed = list(csv.reader(io.StringIO(raw, newline="")))
    # RFC 4180 section 2: records end in CRLF; a field with a comma, quote or line break is
    # quoted, and a quote inside it is doubled; nothing else is quoted (minimal quoting)
    again = io.StringIO(newline="")
    csv.writer(again, lineterminator="\r\n", quoting=csv.QUOTE_MINIMAL).writerows(parsed)
    assert again.getvalue() == raw
    assert raw.count("\r\n") >= len(parsed)
    assert parsed[0] == hits.columns
    assert parsed[1:] == cells(hits.rows(), hits.columns)
    texts = [r[hits.columns.index("t.text")] for r in parsed[1:]]
    mark = "," if query == COMMAS else '"'
    assert texts and set(texts) == {mark}
    assert (',",",' if mark == "," else ',"""",') in raw       # the field round-trips quoted


@pytest.mark.parametrize("fmt", ["csv", "tsv", "jsonl"])
def test_text_formats_on_stdout(small, fmt):
    path, corpus = small
    done = strata("query", path, COMMAS, "--format", fmt)
    assert done.returncode == 0 and "Traceback" not in done.stderr, done.stderr
    n = len(corpus.query(COMMAS))
    if fmt == "csv":   # RFC 4180: a quoted field may hold a line break (contexts span sentences)
        assert len(list(csv.reader(io.StringIO(done.stdout)))) == n + 1
    else:              # TSV escapes line breaks, JSON Lines has one object a line
        assert len(done.stdout.splitlines()) == n + (fmt != "jsonl")


def test_jsonl_file(small, tmp_path):
    path, corpus = small
    out = tmp_path / "hits.jsonl"
    done = strata("query", path, QUOTES, "--format", "jsonl", "-o", str(out))
    assert done.returncode == 0, done.stderr
    got = [json.loads(line) for line in out.read_text(encoding="utf-8").splitlines()]
    assert got == corpus.query(QUOTES).rows() and got


def test_parquet_file_keeps_types(small, tmp_path):
    path, corpus = small
    out = tmp_path / "hits.parquet"
    query = 'find t = word(upos = "NOUN") count per t.lemma'
    done = strata("query", path, query, "--format", "parquet", "-o", str(out))
    assert done.returncode == 0, done.stderr
    table = pq.read_table(out)
    want = corpus.query(query).to_arrow()
    assert table.schema.equals(want.schema)
    assert table.to_pylist() == want.to_pylist() and table.num_rows > 1


def test_parquet_needs_a_file(small):
    done = strata("query", small[0], COMMAS, "--format", "parquet")
    assert done.returncode == 2 and "-o FILE" in done.stderr and "Traceback" not in done.stderr


def test_limit(small, tmp_path):
    path, corpus = small
    out = tmp_path / "hits.jsonl"
    assert len(corpus.query("find w = token")) > 3
    done = strata("query", path, "find w = token", "--limit", "3", "--format", "jsonl", "-o", str(out))
    assert done.returncode == 0, done.stderr
    got = [json.loads(line) for line in out.read_text(encoding="utf-8").splitlines()]
    assert got == corpus.query("find w = token").rows()[:3]


@pytest.mark.parametrize("context", [0, 2, 4])
@pytest.mark.parametrize("cross", [False, True])
def test_context_is_that_many_surface_words(small, tmp_path, context, cross):
    """Left and right context reach exactly `context` surface tokens (the token layer) of the text,
    of the hit's own sentence (the CoNLL-U sentence of each token) unless --cross-sentences."""
    path, corpus = small
    out = tmp_path / "hits.jsonl"
    done = strata("query", path, 'find t = word(upos = "NOUN")', "--context", str(context),
                  *(["--cross-sentences"] if cross else []), "--format", "jsonl", "-o", str(out))
    assert done.returncode == 0, done.stderr
    con = corpus.connect()
    texts = dict(con.execute("SELECT name, text FROM documents").fetchall())
    tokens: dict[str, list[tuple[int, int, str]]] = {}
    for name, start, end, sent in con.execute(
            'SELECT d.name, w.start - d.base, w."end" - d.base, s.sent_id FROM token w JOIN documents d USING (doc) '
            "JOIN sentence s ON s.id = w.sent ORDER BY w.start").fetchall():
        tokens.setdefault(name, []).append((start, end, sent))
    con.close()
    rows = [json.loads(line) for line in out.read_text(encoding="utf-8").splitlines()]
    assert rows
    cut = 0
    for r in rows:
        text, start, end = texts[r["doc"]], r["t.char_start"], r["t.char_end"]
        near = [w for w in tokens[r["doc"]] if cross or w[2] == r["sentence"]]
        before = [w for w in near if w[1] <= start][-context:] if context else []
        after = [w for w in near if w[0] >= end][:context]
        assert r["left"] == one_line(text[before[0][0]:start] if before else "")
        assert r["right"] == one_line(text[end:after[-1][1]] if after else "")
        assert r["hit"] == one_line(text[start:end])
        cut += len(before) < context or len(after) < context
    assert cut > 0 or context == 0      # some hits sit near an edge, so the rule is exercised


def one_line(text: str) -> str:
    """The context columns are for reading: each line break (CRLF, LF, CR) is one space."""
    return re.sub(r"\r\n|\r|\n", " ", text)


# ---- where the query comes from --------------------------------------------------------

def test_query_from_file_and_from_stdin_equal_the_argument(small, tmp_path):
    path, _ = small
    query = 'find t = word(form = ",")\n# a comment line\nshow t.lemma\n'
    by_arg = strata("query", path, query)
    file = tmp_path / "commas.query"
    file.write_text(query, encoding="utf-8")
    by_file = strata("query", path, "-f", str(file))
    by_stdin = strata("query", path, "-", stdin=query)
    assert by_arg.returncode == by_file.returncode == by_stdin.returncode == 0
    assert by_arg.stdout == by_file.stdout == by_stdin.stdout
    assert "t.lemma" in by_arg.stdout


def test_missing_query_file(small, tmp_path):
    done = strata("query", small[0], "-f", str(tmp_path / "nowhere.query"))
    assert done.returncode == 2 and "nowhere.query" in done.stderr and "Traceback" not in done.stderr


# ---- mistakes --------------------------------------------------------------------------

def caret_column(stderr: str, query_line: str) -> int:
    """1-based column of the caret drawn under ``query_line`` (the message indents both alike)."""
    lines = stderr.splitlines()
    i = next(i for i, line in enumerate(lines)
             if line.endswith(query_line) and not line[:len(line) - len(query_line)].strip())
    indent = len(lines[i]) - len(query_line)
    return lines[i + 1].index("^") - indent + 1


def test_syntax_error_has_a_caret_under_the_column(small):
    query = 'find w = token(form = "x") shw w.form'
    done = strata("query", small[0], query)
    assert done.returncode == 2
    assert "Traceback" not in done.stderr and done.stdout == ""
    assert caret_column(done.stderr, query) == query.index("shw") + 1
    assert "column 28" in done.stderr


def test_syntax_error_on_a_later_line(small):
    query = 'find w = token(form = "x")\n  shw w.form'
    done = strata("query", small[0], "-", stdin=query)
    assert done.returncode == 2 and "Traceback" not in done.stderr
    assert "line 2" in done.stderr
    assert caret_column(done.stderr, "  shw w.form") == 3


def test_caret_under_a_long_query(small):
    query = ('find t = word(upos = "NOUN", lemma = "language", form = "language"), s = sentence '
             'where t inside s shw t.form')
    done = strata("query", small[0], query)
    assert done.returncode == 2 and "Traceback" not in done.stderr
    assert caret_column(done.stderr, query) == query.index("shw") + 1


def test_unknown_layer_suggests_the_nearest(small):
    done = strata("query", small[0], "find w = wrod")
    assert done.returncode == 2 and "Traceback" not in done.stderr
    assert "unknown layer 'wrod'" in done.stderr
    assert "did you mean" in done.stderr and "word" in done.stderr.split("did you mean")[1]


def test_unknown_layer_caret_under_the_name(small):
    query = "find w = wrod"
    done = strata("query", small[0], query)
    assert caret_column(done.stderr, query) == query.index("wrod") + 1


def test_bad_regular_expression(small):
    query = 'find t = word(form ~ "(")'
    done = strata("query", small[0], query)
    assert done.returncode == 2 and "Traceback" not in done.stderr
    assert caret_column(done.stderr, query) == query.index('"(') + 1


@pytest.mark.parametrize("args, says", [
    (["find t = word(lemmma = \"x\")"], "did you mean: lemma"),
    (["find t = word", "--limit", "-1"], "limit must not be negative"),
    (["find t = word", "--context", "-1"], "context must be 0 or more tokens"),
    (["find t = word", "--format", "xml"], "unknown output format 'xml'"),
    ([""], "empty query"),
])
def test_other_mistakes_are_user_errors(small, args, says):
    done = strata("query", small[0], *args)
    assert done.returncode == 2 and "Traceback" not in done.stderr
    assert says in done.stderr


@pytest.mark.parametrize("query", [
    f'find w = token(form = "{HOSTILE}")',
    f'find w = token(form in ["{HOSTILE}", "y\\"); DROP TABLE documents; --"])',
    f'find w = token(form ~ "^{HOSTILE}$")',
    f'find w = token(form = "x") where w.form != "{HOSTILE}"',
])
def test_hostile_strings_find_nothing_and_change_nothing(small, tmp_path, query):
    path, corpus = small
    before = strata("info", path)
    out = tmp_path / "hits.jsonl"
    done = strata("query", path, query, "--format", "jsonl", "-o", str(out))
    assert done.returncode == 0, done.stderr
    assert out.read_text(encoding="utf-8") == ""
    after = strata("info", path)
    assert before.returncode == after.returncode == 0
    assert after.stdout == before.stdout and "documents" in after.stdout
    con = corpus.connect()
    assert con.execute("SELECT count(*) FROM documents").fetchone()[0] >= 1
    con.close()
    assert len(corpus.query(COMMAS)) > 0


# ---- explain ---------------------------------------------------------------------------

def test_explain_shows_sql_with_parameters_and_the_duckdb_plan(small):
    query = f'find w = token(form = "{HOSTILE}") show w.sentence.sent_id'
    done = strata("explain", small[0], query)
    assert done.returncode == 0, done.stderr
    text = done.stdout
    sql = text.split("\nsql:\n")[1].split("\nparameters:\n")[0]
    params = text.split("\nparameters:\n")[1].split("\nduckdb plan:\n")[0]
    plan = text.split("\nduckdb plan:\n")[1]
    assert "SELECT" in sql and '"token"' in sql
    assert "DROP" not in sql and "$1" in sql                 # the value is bound, never in the SQL
    assert repr(HOSTILE) in params
    assert "could not plan" not in plan
    assert any(op in plan.upper() for op in ("SEQ_SCAN", "TABLE_SCAN", "READ_PARQUET", "PARQUET_SCAN"))


def test_explain_shows_a_distance_bound_and_the_same_sentence_in_the_sql(small):
    query = ('find v = word(upos = "VERB"), p = word(upos = "ADP") '
             'where v precedes p by at most 1 word in the same sentence')
    done = strata("explain", small[0], query)
    assert done.returncode == 0, done.stderr
    sql = done.stdout.split("\nsql:\n")[1].split("\nparameters:\n")[0]
    params = done.stdout.split("\nparameters:\n")[1].split("\nduckdb plan:\n")[0]
    bound = re.search(r'v1\."ord" <= v0\."ord" \+ \$(\d+) \+ 1', sql)   # b.first <= a.last + N + 1
    assert bound, sql
    assert re.search(rf"^\s*\${bound.group(1)} = 1$", params, re.M), params   # the bound is a parameter
    assert 'v0."sent" = v1."sent"' in sql


def test_within_is_refused_with_the_caret_under_it(small):
    query = 'find a = word, b = word where a precedes b within 3 words'
    done = strata("query", small[0], query)
    assert done.returncode == 2 and "Traceback" not in done.stderr
    lines = done.stderr.splitlines()
    shown = next(k for k, line in enumerate(lines) if query in line)
    caret = lines[shown + 1]
    assert caret.index("^") - lines[shown].index(query) == query.index("within")
    assert "by at most 3 words" in done.stderr and "give or take 20ms" in done.stderr


def test_a_sample_larger_than_the_result_is_noted_on_stderr(small):
    path, corpus = small
    every = len(corpus.query('find t = word(upos = "PROPN")'))
    done = strata("query", path, f'find t = word(upos = "PROPN") sample {every + 10} seed 4', "--format", "csv")
    assert done.returncode == 0, done.stderr
    assert len(done.stdout.strip().splitlines()) == every + 1          # the header and every hit
    assert f"note: sample {every + 10} asked for, but the query has {every} hits" in done.stderr


def test_by_after_an_aggregate_is_a_user_error_naming_per(small):
    done = strata("query", small[0], "find t = word count by t.lemma")
    assert done.returncode == 2 and "Traceback" not in done.stderr
    assert "write `per t.lemma`" in done.stderr


def test_explain_of_a_mistake_is_a_user_error(small):
    done = strata("explain", small[0], "find w = wrod")
    assert done.returncode == 2 and "did you mean" in done.stderr and "Traceback" not in done.stderr


# ---- the file's ending picks the format ------------------------------------------------

def read_back(path, fmt: str) -> list[list[str]] | list[dict]:
    """A hit file read with an independent reader of its format."""
    if fmt == "csv":
        with open(path, encoding="utf-8", newline="") as f:
            return list(csv.reader(f))
    if fmt == "tsv":
        return [line.split("\t") for line in path.read_text(encoding="utf-8").splitlines()]
    if fmt == "jsonl":
        return [json.loads(line) for line in path.read_text(encoding="utf-8").splitlines()]
    return pq.read_table(path).to_pylist()


@pytest.mark.parametrize("fmt", ["csv", "tsv", "jsonl", "parquet"])
def test_the_ending_picks_the_format_and_every_hit_is_written(small, tmp_path, fmt):
    path, corpus = small
    query = "find w = token"
    n = len(corpus.query(query))
    assert n > 50                                  # more than the screen table shows
    out = tmp_path / f"hits.{fmt.upper() if fmt == 'tsv' else fmt}"
    done = strata("query", path, query, "-o", str(out))
    assert done.returncode == 0, done.stderr
    rows = read_back(out, fmt)
    header = fmt in ("csv", "tsv")
    assert len(rows) == n + header
    if header:
        assert rows[0] == corpus.query(query).columns
    else:
        assert rows == corpus.query(query).rows()


def test_format_overrides_the_ending(small, tmp_path):
    path, corpus = small
    out = tmp_path / "hits.csv"
    done = strata("query", path, COMMAS, "-o", str(out), "--format", "jsonl")
    assert done.returncode == 0, done.stderr
    assert read_back(out, "jsonl") == corpus.query(COMMAS).rows()


@pytest.mark.parametrize("name", ["hits.txt", "hits", "hits.csv.bak"])
def test_an_unknown_ending_is_refused_with_the_known_ones(small, tmp_path, name):
    out = tmp_path / name
    done = strata("query", small[0], COMMAS, "-o", str(out))
    assert done.returncode == 2 and "Traceback" not in done.stderr
    assert all(e in done.stderr for e in (".csv", ".tsv", ".jsonl", ".parquet"))
    assert name in done.stderr and not out.exists()


def test_the_screen_table_never_goes_to_a_file(small, tmp_path):
    out = tmp_path / "hits.csv"
    done = strata("query", small[0], COMMAS, "-o", str(out), "--format", "table")
    assert done.returncode == 2 and "Traceback" not in done.stderr
    assert "never goes to a file" in done.stderr and not out.exists()


@pytest.mark.parametrize("args", [
    ["query", "{corpus}", COMMAS, "-o", "{missing}/hits.csv"],
    ["query", "{corpus}", COMMAS, "-o", "{missing}/hits.parquet"],
    ["export", "{corpus}", "-o", "{missing}/back.conllu"],
    ["bench", "--json", "{missing}/bench.json"],
    ["bench", "--plot", "{missing}/bench.png"],
])
def test_a_missing_output_folder_is_a_user_error(small, tmp_path, args):
    missing = tmp_path / "no such folder"
    done = strata(*[a.format(corpus=small[0], missing=missing) for a in args])
    assert done.returncode == 2, done.stderr
    assert "Traceback" not in done.stderr and "does not exist" in done.stderr
    assert not missing.exists()


def test_a_failed_query_leaves_an_older_file_as_it_was(small, tmp_path):
    out = tmp_path / "hits.csv"
    out.write_bytes(b"older hits\r\n")
    done = strata("query", small[0], "find w = wrod", "-o", str(out))
    assert done.returncode == 2
    assert out.read_bytes() == b"older hits\r\n"
    assert [p.name for p in tmp_path.iterdir()] == ["hits.csv"]      # no temporary file left


@pytest.mark.parametrize("limit", ["1000000", str(2 ** 63 - 1), str(2 ** 63), "9" * 30])
def test_a_limit_past_the_corpus_or_past_64_bits_is_accepted(small, tmp_path, limit):
    """Larger than any corpus: every hit, by the option and by the query's own `limit`."""
    path, corpus = small
    n = len(corpus.query("find w = token"))
    for args in (["find w = token", "--limit", limit], [f"find w = token limit {limit}"]):
        out = tmp_path / "hits.jsonl"
        done = strata("query", path, *args, "-o", str(out))
        assert done.returncode == 0 and "Traceback" not in done.stderr, done.stderr
        assert len(read_back(out, "jsonl")) == n
    done = strata("query", path, "find w = token count", "--limit", limit)
    assert done.returncode == 0 and str(n) in done.stdout


def test_an_attribute_of_another_layer_says_where_it_lives(small):
    """UPOS belongs to syntactic words (CoNLL-U), not to surface tokens."""
    done = strata("query", small[0], 'find t = token(upos = "NOUN") count')
    assert done.returncode == 2 and "Traceback" not in done.stderr
    assert "layer 'token' has no attribute 'upos'" in done.stderr
    hint = next(line for line in done.stderr.splitlines() if line.startswith("'upos' is an attribute of layer"))
    assert "'word'" in hint                      # (and 'empty': empty nodes carry UPOS too)
