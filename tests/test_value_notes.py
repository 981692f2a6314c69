"""A value no node has still runs, with a note naming the nearest values that occur (engine/
value_notes.py); on the open treebank (UD English GUM, dev split), whose UPOS tags are the
17 of the Universal Dependencies guidelines (universaldependencies.org/u/pos)."""
from __future__ import annotations

import subprocess
import sys

import pytest


@pytest.fixture(scope="module")
def corpus(gum_corpora):
    return gum_corpora["dev"][0]


def test_a_misspelt_tag_runs_and_names_the_nearest_tags(corpus):
    hits = corpus.query('find t = word(upos = "VREB") count')
    assert hits.rows() == [{"count": 0}]
    [note] = hits.notes
    assert "upos = 'VREB'" in note and "'VERB'" in note


def test_each_missing_value_of_a_list_gets_its_note(corpus):
    hits = corpus.query('find t = word(upos in ["VERB", "NUON"], feats.Number = "Sg") count')
    assert hits.rows()[0]["count"] == 0
    assert len(hits.notes) == 2
    assert any("'NUON'" in n and "'NOUN'" in n for n in hits.notes)
    assert any("'Sg'" in n and "'Sing'" in n for n in hits.notes)


def test_values_that_occur_and_open_ended_attributes_get_no_note(corpus):
    assert corpus.query('find t = word(upos = "VERB") count').notes == ()
    assert corpus.query('find t = word(lemma = "zzzq") count').notes == ()      # thousands of lemmas
    assert corpus.query('find t = word where not t.upos = "VREB" count').notes != ()


def test_a_document_attribute(corpus):
    [note] = corpus.query('find t = word where t.doc.genre = "acadmic" count').notes
    assert "'academic'" in note


def test_the_note_goes_to_stderr_and_the_exit_code_is_0(gum_corpora):
    corpus = gum_corpora["dev"][0]
    done = subprocess.run([sys.executable, "-m", "engine.cli", "query", str(corpus.path),
                           'find t = word(upos = "VREB") count'], capture_output=True, text=True, timeout=120)
    assert done.returncode == 0 and "note: no node of 'word' has upos = 'VREB'" in done.stderr
    assert "note" not in done.stdout
