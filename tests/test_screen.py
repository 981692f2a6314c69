"""The screen table: nothing left out without a note, no cell cut but the context.

Run on the open treebank's first sentences (its document and sentence names are long, which
is what pushes a table past 80 columns) and checked against the hit rows of the Python API.
"""
from __future__ import annotations

import re

import pytest

from engine import Corpus
from engine.screen import MISSING
from tests.conftest import first_gum_sentences

MANY = ('find t = word(upos = "VERB") show t.lemma, t.xpos, t.feats, t.deprel, t.misc, '
        "t.sentence.sent_id")


@pytest.fixture(scope="module")
def corpus(tmp_path_factory):
    root = tmp_path_factory.mktemp("screen")
    c = Corpus.create(root / "corpus")
    c.import_files([first_gum_sentences(root, 40)], progress=False)
    return c


def squeeze(text: str) -> str:
    return re.sub(r"\s+", "", text)


@pytest.mark.parametrize("width", [40, 80, 132])
def test_every_show_column_and_every_value_whole(corpus, width):
    hits = corpus.query(MANY, limit=12)
    out = hits.render_table(width)
    lines = out.splitlines()
    assert all(len(line) <= width for line in lines)
    blocks = out.split("-- hit ")[1:]
    assert len(blocks) == len(hits) == 12          # too many columns for one line: one block a hit
    for block, row in zip(blocks, hits.rows()):
        for label in ("t.lemma", "t.xpos", "t.feats", "t.deprel", "t.misc", "t.sentence.sent_id"):
            assert re.search(rf"^\s+{re.escape(label)}(\s|$)", block, re.M), label
            value = MISSING if row[label] is None else str(row[label])
            assert squeeze(value) in squeeze(block)                    # whole, maybe wrapped
        assert "…" not in block


def test_across_cuts_only_the_context_and_marks_it(corpus):
    query = 'find t = word(upos = "NOUN") show t.lemma'
    hits = corpus.query(query, limit=20)
    out = hits.render_table(160)
    lines = out.splitlines()
    header = lines[0].split()
    assert header[:3] == ["left", "hit", "right"] and "t.lemma" in header
    starts = [m.start() for m in re.finditer(r"\S+", lines[1])]    # the rule under each column
    for line, row in zip(lines[2:22], hits.rows()):
        cells = [line[a:b].strip() for a, b in zip(starts, starts[1:] + [None])]
        named = dict(zip(header, cells))
        assert named["hit"] == row["hit"].strip() and named["t.lemma"] == row["t.lemma"]
        assert named["sentence"] == row["sentence"] and named["doc"] == row["doc"]
        if named["left"].startswith("…"):
            assert row["left"].endswith(named["left"][1:])
        else:
            assert named["left"] == row["left"].strip()


def test_missing_group_keys_say_so(corpus):
    hits = corpus.query("find t = word count per t.feats.Number")
    out = hits.render_table(80)
    none = [r for r in hits.rows() if r["t.feats.Number"] is None]
    assert len(none) == 1
    line = next(line for line in out.splitlines() if line.startswith(MISSING))
    assert line.split()[-1] == str(none[0]["count"])


def test_rows_past_the_screen_are_counted(corpus):
    hits = corpus.query("find t = word")
    out = hits.render_table(200, max_rows=10)
    assert f"{len(hits) - 10} more hits; use -o FILE or --limit to get them all" in out
    assert out.splitlines()[-1] == f"({len(hits)} hits)"
