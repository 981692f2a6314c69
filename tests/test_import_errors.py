"""Bad CoNLL-U input: a message with file:line, exit code 2, the corpus exactly as before.

The malformed files are made in the test by breaking one thing in the first sentences of
the open treebank (../shared/data/ud-english-gum), so each error has a known line.
"""
from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

from engine import Corpus, StrataError
from tests.conftest import gum_file


def _head(n_sentences: int) -> list[str]:
    """The first sentences of the dev split, as lines (with their newlines)."""
    out, seen = [], 0
    with open(gum_file("dev"), encoding="utf-8") as f:
        for line in f:
            out.append(line)
            if line == "\n":
                seen += 1
                if seen == n_sentences:
                    break
    return out


def _token_line(lines: list[str], sentence: int, token: str) -> int:
    """Index of the line of token ``token`` in the ``sentence``-th sentence (0-based)."""
    seen = 0
    for i, line in enumerate(lines):
        if line == "\n":
            seen += 1
        elif seen == sentence and line.split("\t")[0] == token:
            return i
    raise LookupError(token)


def _set(lines, i, col, value):
    cols = lines[i].rstrip("\n").split("\t")
    cols[col] = value
    lines[i] = "\t".join(cols) + "\n"


def _snapshot(corpus: Corpus):
    files = sorted(str(p.relative_to(corpus.path)) for p in corpus.path.rglob("*") if p.is_file())
    con = corpus.store.catalog_connection()
    tables = {t: con.execute(f"SELECT * FROM {t} ORDER BY ALL").fetchall()
              for t in ("documents", "doc_attrs", "layers", "layer_attrs", "parts", "imports", "meta")}
    con.close()
    return files, tables


def _breakers():
    def wrong_columns(lines):
        i = _token_line(lines, 1, "3")
        lines[i] = "\t".join(lines[i].split("\t")[:9]) + "\n"
        return i, "10 tab-separated columns"

    def bad_id(lines):
        i = _token_line(lines, 1, "3")
        _set(lines, i, 0, "x3")
        return i, "bad ID"

    def head_out_of_range(lines):
        i = _token_line(lines, 1, "2")
        _set(lines, i, 6, "99")
        return i, "out of range"

    def cycle(lines):
        # sentence 2: token 1 depends on 12 (the root); make the root depend on token 1
        i = _token_line(lines, 1, "12")
        _set(lines, i, 6, "1")
        return i - 11, "cycle"

    def unbalanced_entity(lines):
        i = _token_line(lines, 1, "7")      # "Entity=3)" closes the mention opened on token 3
        _set(lines, i, 9, "_")
        return _token_line(lines, 1, "3"), "never closed"

    def bad_utf8(lines):
        i = _token_line(lines, 1, "5")
        lines[i] = lines[i].replace("learned", "learn\udcffed")
        return i, "invalid UTF-8"

    def duplicate_sentence_id(lines):
        start = max(k for k, l in enumerate(lines[:-1]) if l == "\n") + 1   # last sentence
        block = [l for l in lines[start:] if not l.startswith("# newdoc")]
        lines.extend(block)
        return len(lines) - len(block), "used twice"

    def id_beyond_64_bits(lines):         # 2^64 + 1: no int64 holds it (was an ArrowInvalid traceback)
        i = _token_line(lines, 1, "3")
        _set(lines, i, 0, str(2 ** 64 + 1))
        return i, "20 digits; strata reads at most 18"

    def range_beyond_64_bits(lines):
        i = _token_line(lines, 1, "3")
        lines.insert(i, "\t".join([f"3-{2 ** 70}"] + ["_"] * 9) + "\n")
        return i, "22 digits"

    def head_beyond_64_bits(lines):
        i = _token_line(lines, 1, "2")
        _set(lines, i, 6, "9" * 30)
        return i, "HEAD 999999999999999999999999... has 30 digits"

    def head_in_other_digits(lines):      # ARABIC-INDIC DIGIT THREE: a Unicode digit, not a number here
        i = _token_line(lines, 1, "2")
        _set(lines, i, 6, "\u0663")
        return i, "is not a number"

    return [wrong_columns, bad_id, head_out_of_range, cycle, unbalanced_entity, bad_utf8, duplicate_sentence_id,
            id_beyond_64_bits, range_beyond_64_bits, head_beyond_64_bits, head_in_other_digits]


def _write(path: Path, lines: list[str]) -> None:
    path.write_bytes("".join(lines).encode("utf-8", "surrogateescape"))


@pytest.mark.parametrize("breaker", _breakers(), ids=lambda f: f.__name__)
def test_bad_file_names_the_line_and_changes_nothing(tmp_path, breaker):
    corpus = Corpus.create(tmp_path / "c")
    good = _head(1)
    _write(tmp_path / "good.conllu", good)
    corpus.import_files([tmp_path / "good.conllu"], progress=False)
    before = _snapshot(corpus)

    lines = _head(3)
    lines = [l.replace("GUM_academic_exposure", "other_doc") for l in lines]
    index, tokens = breaker(lines)
    bad = tmp_path / "bad.conllu"
    _write(bad, lines)
    with pytest.raises(StrataError) as e:
        Corpus.open(corpus.path).import_files([bad], progress=False)
    assert e.value.file == str(bad)
    assert e.value.line == index + 1
    assert tokens in str(e.value)
    assert f"bad.conllu:{index + 1}:" in str(e.value)
    assert _snapshot(Corpus.open(corpus.path)) == before


def test_lenient_skips_bad_sentences_and_lists_them(tmp_path):
    lines = _head(3)
    i = _token_line(lines, 1, "2")
    _set(lines, i, 6, "99")
    path = tmp_path / "bad.conllu"
    _write(path, lines)
    corpus = Corpus.create(tmp_path / "c")
    report = corpus.import_files([path], lenient=True, progress=False)
    assert report.counts["sentences"] == 2
    assert len(report.skipped) == 1 and "out of range" in report.skipped[0]


def test_a_second_annotation_goes_under_a_prefix(tmp_path):
    lines = _head(3)
    path = tmp_path / "gold.conllu"
    _write(path, lines)
    # a "parser output" of the same text: the same words with other relations
    parsed = [l if l.startswith("#") or l == "\n" else "\t".join(
        c if k != 7 else "dep" for k, c in enumerate(l.split("\t"))) for l in lines]
    _write(tmp_path / "parsed.conllu", parsed)
    corpus = Corpus.create(tmp_path / "c")
    corpus.import_files([path], progress=False)
    with pytest.raises(StrataError, match="--prefix"):
        corpus.import_files([tmp_path / "parsed.conllu"], progress=False)
    corpus.import_files([tmp_path / "parsed.conllu"], prefix="parser", progress=False)
    con = corpus.connect()
    same = con.execute('SELECT count(*) FROM word g JOIN "parser.word" p ON g.start = p.start AND g."end" = p."end"'
                       ).fetchone()[0]
    assert same == con.execute("SELECT count(*) FROM word").fetchone()[0] > 0
    assert con.execute('SELECT DISTINCT deprel FROM "parser.word"').fetchall() == [("dep",)]
    assert con.execute("SELECT count(*) FROM documents").fetchone()[0] == 1    # one text, two annotations
    assert corpus.export("conllu", prefix="parser") == "".join(parsed)


def _cli(*args, cwd):
    env = dict(os.environ)
    return subprocess.run([sys.executable, "-m", "engine.cli", *map(str, args)], capture_output=True, text=True,
                          cwd=cwd, env=env)


def test_cli_exit_code_2_without_traceback(tmp_path):
    lines = _head(2)
    _set(lines, _token_line(lines, 1, "2"), 6, "99")
    bad = tmp_path / "bad.conllu"
    _write(bad, lines)
    assert _cli("init", tmp_path / "c", cwd=tmp_path).returncode == 0
    r = _cli("import", tmp_path / "c", bad, cwd=tmp_path)
    assert r.returncode == 2
    assert "bad.conllu:" in r.stderr and "Traceback" not in r.stderr
    r = _cli("info", tmp_path / "nowhere", cwd=tmp_path)
    assert r.returncode == 2 and "no corpus" in r.stderr and "Traceback" not in r.stderr
    r = _cli("import", tmp_path / "c", tmp_path / "missing.conllu", cwd=tmp_path)
    assert r.returncode == 2 and "missing.conllu" in r.stderr


def test_cli_import_info_export(tmp_path):
    good = tmp_path / "g.conllu"
    _write(good, _head(4))
    assert _cli("init", tmp_path / "c", cwd=tmp_path).returncode == 0
    r = _cli("import", tmp_path / "c", good, cwd=tmp_path)
    assert r.returncode == 0, r.stderr
    assert "4 sentences" in r.stdout
    r = _cli("info", tmp_path / "c", cwd=tmp_path)
    assert r.returncode == 0 and "word" in r.stdout and "mention" in r.stdout
    r = _cli("export", tmp_path / "c", "-o", tmp_path / "back.conllu", cwd=tmp_path)
    assert r.returncode == 0
    assert (tmp_path / "back.conllu").read_bytes() == good.read_bytes()
    for cmd in ("init", "import", "info", "export", "query", "explain", "demo"):
        assert _cli(cmd, "--help", cwd=tmp_path).returncode == 0


def test_text_comment_that_disagrees_with_the_tokens_is_reported(tmp_path):
    """The primary text comes from the words and SpaceAfter; a differing '# text' is named by line."""
    lines = _head(3)
    i = next(k for k, l in enumerate(lines) if l.startswith("# text = ") and k > 20)
    lines[i] = lines[i].rstrip("\n") + " (edited)\n"
    path = tmp_path / "text.conllu"
    _write(path, lines)
    corpus = Corpus.create(tmp_path / "c")
    report = corpus.import_files([path], progress=False)
    assert len(report.warnings) == 1
    assert f"text.conllu:{i + 1}:" in report.warnings[0]          # the line of the '# text' comment
    assert "differs from its tokens" in report.warnings[0]
    assert corpus.export("conllu") == "".join(lines)      # the comment itself is kept as written


def test_a_line_of_33_mib_is_read_whole(tmp_path):
    """The line reader's block is 16 MiB; a longer line makes it read the block again with
    room for it (before: an error about a row straddling two blocks, with no line number)."""
    lines = _head(2)
    i = _token_line(lines, 1, "2")
    form = "x" * (33 << 20)
    _set(lines, i, 1, form)
    lines = [l for l in lines if not l.startswith("# text")]      # the text comes from the forms
    path = tmp_path / "long.conllu"
    _write(path, lines)
    corpus = Corpus.create(tmp_path / "c")
    corpus.import_files([path], progress=False)
    got = corpus.query('find w = word where length(w.form) > 1000000 show length(w.form) as n').table
    assert got.column("n").to_pylist() == [len(form)]
