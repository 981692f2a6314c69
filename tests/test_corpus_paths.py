"""Every printable ASCII character in a corpus folder's name: the corpus works with every
file inside the named folder, or `init` refuses the name with the reason and creates
nothing.  DuckDB reads some characters of a path as syntax ("?" starts connection options,
"\\" is a separator, "*", "?", "[", "]" are a file pattern), so those are refused; every other
character must work.  The check value is the word count of three treebank sentences (UD
English GUM, dev split), as the `conllu` library from the package registry counts them."""
from __future__ import annotations

import os
import string
import subprocess
import sys
from pathlib import Path

import conllu
import pytest

from engine import Corpus, StrataError
from engine.store import PATH_CHARACTERS_REFUSED
from tests.conftest import REPO, first_gum_sentences

PRINTABLE = [c for c in string.printable if c not in string.whitespace or c == " "]   # 0x20..0x7E


def files_under(folder: Path) -> set[Path]:
    return {Path(d) / f for d, _, fs in os.walk(folder) for f in fs} | {Path(d) for d, _, _ in os.walk(folder)}


@pytest.fixture(scope="module")
def source(tmp_path_factory) -> tuple[Path, int]:
    path = first_gum_sentences(tmp_path_factory.mktemp("src"), 3)
    words = sum(1 for s in conllu.parse(path.read_text(encoding="utf-8")) for t in s if isinstance(t["id"], int))
    return path, words


@pytest.mark.parametrize("char", [c for c in PRINTABLE if c != "/"], ids=lambda c: f"0x{ord(c):02x}")
def test_every_printable_character_in_a_folder_name(tmp_path, source, char):
    path, words = source
    parent = tmp_path / "here"
    parent.mkdir()
    root = parent / f"c{char}x"
    if char in PATH_CHARACTERS_REFUSED:
        with pytest.raises(StrataError) as refused:
            Corpus.create(root)
        assert repr(char) in str(refused.value) and "choose a folder" in str(refused.value)
        assert not any(parent.iterdir())                       # nothing was made
        return
    corpus = Corpus.create(root)
    corpus.import_files([path], progress=False)
    assert Corpus.open(root).query("find w = word count").table.column("count")[0].as_py() == words
    made = files_under(parent) - {parent}
    assert made and all(p == root or root in p.parents for p in made), sorted(map(str, made))


@pytest.mark.parametrize("name", ["a\\b", "q?x", "c[ab]x"])
def test_init_refuses_a_name_the_database_would_read_otherwise(tmp_path, name):
    done = subprocess.run([sys.executable, "-m", "engine.cli", "init", name], cwd=tmp_path, capture_output=True,
                          text=True, timeout=120, env={**os.environ, "PYTHONPATH": str(REPO)})
    assert done.returncode == 2 and "Traceback" not in done.stderr
    assert "choose a folder" in done.stderr
    assert list(tmp_path.iterdir()) == []


def test_a_folder_named_tilde_stays_where_it_is_named(tmp_path, source, monkeypatch):
    """DuckDB expands a leading "~" to the home folder: a relative folder "~" must not."""
    monkeypatch.chdir(tmp_path)
    monkeypatch.setenv("HOME", str(tmp_path / "home"))
    corpus = Corpus.create("~")
    corpus.import_files([source[0]], progress=False)
    assert (tmp_path / "~" / "catalog.duckdb").exists() and not (tmp_path / "home").exists()
