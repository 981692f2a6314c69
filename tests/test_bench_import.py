"""The import benchmark's input: the treebank replicated with unique names, same tokens.

Judge: the `conllu` reference parser counts tokens and reads the ids; the treebank itself is
read in place from ../shared/data/ud-english-gum/ (skipped with a reason where absent).
"""
from __future__ import annotations

from collections import Counter
from pathlib import Path

import pytest

conllu = pytest.importorskip("conllu")

from benchmarks import import_bench  # noqa: E402

GUM = Path(__file__).resolve().parents[1].parent / "shared" / "data" / "ud-english-gum"


def _parse(paths: list[Path]) -> list:
    out = []
    for p in paths:
        with open(p, encoding="utf-8") as f:
            out += list(conllu.parse_incr(f))
    return out


@pytest.fixture(scope="module")
def gum_files() -> list[Path]:
    files = sorted(GUM.glob("*.conllu"))
    if not files:
        pytest.skip(f"treebank not found at {GUM}")
    return files


def test_token_count_agrees_with_the_conllu_library(gum_files):
    ours = sum(import_bench.count_tokens(p) for p in gum_files)
    theirs = sum(1 for s in _parse(gum_files) for t in s if isinstance(t["id"], int))
    assert ours == theirs


def test_copies_keep_tokens_and_make_names_unique(gum_files, tmp_path):
    per_copy = sum(import_bench.count_tokens(p) for p in gum_files)
    files, n = import_bench.replicate(GUM, per_copy + 1, tmp_path)  # just over one copy: two
    assert len(files) == 2 * len(gum_files) and n == 2 * per_copy
    sentences = _parse(files)
    assert sum(1 for s in sentences for t in s if isinstance(t["id"], int)) == n
    sent_ids = Counter(s.metadata["sent_id"] for s in sentences)
    assert max(sent_ids.values()) == 1
    docs = Counter(s.metadata["newdoc id"] for s in sentences if "newdoc id" in s.metadata)
    assert max(docs.values()) == 1 and len(docs) % 2 == 0
    # Each copy's sentence ids still start with their document's name.
    doc = None
    for s in sentences:
        doc = s.metadata.get("newdoc id", doc)
        assert s.metadata["sent_id"].startswith(doc)
    # Everything but the renamed comments is verbatim.
    original = gum_files[0].read_text(encoding="utf-8").splitlines()
    copy = files[-len(gum_files)].read_text(encoding="utf-8").splitlines()
    assert len(original) == len(copy)
    changed = [(a, b) for a, b in zip(original, copy) if a != b]
    assert changed and all(a.startswith(("# newdoc id", "# sent_id")) for a, _ in changed)


def test_missing_treebank_is_a_clear_error(tmp_path, capsys):
    code = import_bench.main(["--tokens", "10", "--data", str(tmp_path / "absent")])
    assert code == 2
    assert "treebank not found" in capsys.readouterr().err
