"""Shared fixtures: the open treebank read in place, and fresh corpora."""
from __future__ import annotations

from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[1]
GUM = REPO.parent / "shared" / "data" / "ud-english-gum"
GUM_FILES = {"dev": GUM / "en_gum-ud-dev.conllu", "test": GUM / "en_gum-ud-test.conllu"}


def gum_file(split: str) -> Path:
    path = GUM_FILES[split]
    if not path.exists():
        pytest.skip(f"the treebank is not at {path} (../shared is absent): real-data check skipped")
    return path


@pytest.fixture(scope="session")
def gum_corpora(tmp_path_factory):
    """Both treebank splits, each imported once into its own corpus."""
    from engine import Corpus
    out = {}
    for split in ("dev", "test"):
        path = gum_file(split)
        c = Corpus.create(tmp_path_factory.mktemp(f"gum-{split}") / "corpus")
        report = c.import_files([path], progress=False)
        out[split] = (c, report, path)
    return out


def first_gum_document(tmp: Path, docs: int = 1):
    """A corpus holding the first document (``docs``: documents) of the dev split; returns
    (corpus, the CoNLL-U file)."""
    from engine import Corpus
    lines, seen = [], 0
    with open(gum_file("dev"), encoding="utf-8") as f:
        for line in f:
            if line.startswith("# newdoc") and seen == docs:
                break
            seen += line.startswith("# newdoc")
            lines.append(line)
    src = tmp / "one.conllu"
    src.write_text("".join(lines), encoding="utf-8")
    corpus = Corpus.create(tmp / "corpus")
    corpus.import_files([src], progress=False)
    return corpus, src


def first_gum_sentences(root: Path, n: int) -> Path:
    """A CoNLL-U file in ``root`` holding the first ``n`` sentences of the dev split."""
    text = gum_file("dev").read_text(encoding="utf-8")
    blocks = [b for b in text.split("\n\n") if b.strip()][:n]
    source = root / "first.conllu"
    source.write_text("\n\n".join(blocks) + "\n\n", encoding="utf-8")
    return source


def demo_tier_rows(data: Path) -> list[dict[str, str]]:
    """Every timed row of the demo corpus as the tier table writes them (doc, tier, start, end,
    label, speaker, pron): the tier table read with ``csv``, the TextGrid call read with praatio
    (the registry's TextGrid library), its tiers named "SPEAKER - KIND" and its ``sil``
    intervals on a speaker's spoken tier taken as that speaker's pauses."""
    import csv

    from praatio import textgrid
    with open(data / "calls.tiers.tsv", encoding="utf-8", newline="") as f:
        rows = list(csv.DictReader(f, delimiter="\t"))
    for path in sorted(data.glob("*.TextGrid")):
        grid = textgrid.openTextgrid(str(path), includeEmptyIntervals=False)
        for name in grid.tierNames:
            speaker, _, kind = name.rpartition(" - ")
            for a, b, label in grid.getTier(name).entries:
                tier = "pauses" if kind == "spoken" and label == "sil" else kind
                rows.append({"doc": path.stem, "tier": tier, "start": f"{a:.3f}", "end": f"{b:.3f}",
                             "label": label, "speaker": speaker, "pron": ""})
    return rows
