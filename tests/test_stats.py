"""Part statistics (engine/stats.py): sketches that merge, estimates, and the merged layer figures.

References outside the project: exact counts by plain Python (sets and counters) and by
DuckDB's exact ``count(DISTINCT ...)``; DuckDB's own ``approx_count_distinct`` over the same
rows; the open treebank in ../shared (GUM) for the stored layers.
"""
from __future__ import annotations

import random

import duckdb
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from engine import Corpus
from engine.stats import estimate, merge, merge_registers, part_stats
from tests.conftest import gum_file


def _write(tmp_path, name: str, columns: dict) -> str:
    path = str(tmp_path / f"{name}.parquet")
    pq.write_table(pa.table(columns), path)
    return path


def _values(rng: random.Random, n: int, vocabulary: int) -> list[str | None]:
    return [None if rng.random() < 0.1 else f"w{rng.randrange(vocabulary)}" for _ in range(n)]


def test_merged_sketches_are_the_sketch_of_the_union(tmp_path):
    """HyperLogLog registers of two parts, merged by maximum, equal DuckDB's registers over both."""
    rng = random.Random(7)
    a = _write(tmp_path, "a", {"form": _values(rng, 5000, 3000)})
    b = _write(tmp_path, "b", {"form": _values(rng, 7000, 3000)})
    stats = part_stats(duckdb.connect(), [a, b])
    merged = merge_registers([stats[a].attrs["form"].registers, stats[b].attrs["form"].registers])
    union = duckdb.sql(f"SELECT approx_count_distinct(form) EXPORT_STATE FROM read_parquet(['{a}', '{b}'])").fetchall()[0][0]
    assert list(merged) == union["registers"]


@pytest.mark.parametrize("n,vocabulary", [(50, 20), (2000, 1500), (20000, 3000), (60000, 40000)])
def test_estimates_against_exact_counts_and_duckdb(tmp_path, n, vocabulary):
    """Within 10 % of the exact count (about three standard errors of 1,024 registers), and
    within 1 % of DuckDB's own estimate from the same registers."""
    rng = random.Random(n)
    values = _values(rng, n, vocabulary)
    path = _write(tmp_path, "p", {"form": values})
    s = part_stats(duckdb.connect(), [path])[path]
    exact = len({v for v in values if v is not None})                       # plain Python
    duck = duckdb.sql(f"SELECT approx_count_distinct(form) FROM read_parquet('{path}')").fetchall()[0][0]
    assert s.attrs["form"].n_null == values.count(None)
    assert abs(estimate(s.attrs["form"].registers) - exact) <= 0.10 * exact
    assert abs(estimate(s.attrs["form"].registers) - duck) <= max(1, 0.01 * duck)


def test_key_value_statistics_and_merge_against_plain_counts(tmp_path):
    """Keys of FEATS-like bundles: rows with each key exactly, distinct values estimated; a
    column one part lacks counts as null there."""
    a = _write(tmp_path, "a", {"id": [1, 2, 3, 4], "feats": ["Number=Sing|Person=3", "Number=Plur", None, "Mood=Ind"],
                               "upos": ["NOUN", "NOUN", "VERB", None]})
    b = _write(tmp_path, "b", {"id": [5, 6], "feats": ["Number=Sing", "Number=Dual|Person=1"]})
    stats = part_stats(duckdb.connect(), [a, b], skip={"id"}, key_value=["feats"])
    merged = merge([stats[a], stats[b]])
    total, attrs, keys = merged.rows, merged.attrs, merged.keys
    assert total == 6 and merged.sent_null is None          # the parts have no sentence column
    assert "id" not in attrs
    assert attrs["upos"][1:] == (2, 1 + 2)                    # NOUN, VERB; one null in a, b has no upos
    assert attrs["feats"][2] == 1
    assert keys["feats"]["Number"] == (3, 4)                  # Sing, Plur, Dual in 4 rows
    assert keys["feats"]["Person"] == (2, 2)
    assert keys["feats"]["Mood"] == (1, 1)


def test_layer_figures_on_the_treebank_and_an_incremental_import(tmp_path, monkeypatch):
    """After importing GUM dev, then test into the same corpus: null counts are exact and
    distinct counts within 10 % of DuckDB's exact count(DISTINCT) over the stored layers;
    the second import computed statistics for its own parts only."""
    monkeypatch.setenv("STRATA_IMPORT_PROCESSES", "1")
    corpus = Corpus.create(tmp_path / "c")
    corpus.import_files([gum_file("dev")], progress=False)
    con = corpus.store.catalog_connection()
    first_parts = {p for (p,) in con.execute("SELECT path FROM part_stats").fetchall()}
    con.close()
    corpus.import_files([gum_file("test")], progress=False, prefix="")
    layers = corpus.store.layers()
    q = corpus.connect()
    for layer, attrs in (("word", ["form", "lemma", "upos", "deprel", "feats.Number", "misc.SpaceAfter"]),
                         ("sentence", ["sent_id", "s_type", "speaker"]), ("mention", ["entity", "type"])):
        for attr in attrs:
            info = layers[layer].attrs[attr]
            exact, nulls = q.execute(f'SELECT count(DISTINCT "{attr}"), count(*) - count("{attr}") '
                                     f'FROM "{layer}"').fetchone()
            assert info.n_null == nulls, (layer, attr)
            assert abs(info.n_distinct - exact) <= max(1, 0.10 * exact), (layer, attr, info.n_distinct, exact)
    con = corpus.store.catalog_connection()
    all_parts = {p for (p,) in con.execute("SELECT path FROM part_stats").fetchall()}
    listed = {p for (p,) in con.execute("SELECT path FROM parts").fetchall()}
    con.close()
    assert first_parts < all_parts == listed


def test_a_catalog_without_part_statistics_gets_them_at_its_next_commit(tmp_path, monkeypatch):
    """Corpora made before part statistics existed: their parts are counted once, at the next import."""
    monkeypatch.setenv("STRATA_IMPORT_PROCESSES", "1")
    corpus = Corpus.create(tmp_path / "c")
    corpus.import_files([gum_file("dev")], progress=False)
    con = corpus.store.catalog_connection(read_only=False)
    for table in ("part_stats", "part_attrs", "part_keys"):
        con.execute(f"DROP TABLE {table}")
    con.close()
    before = corpus.store.layers()["word"].attrs["upos"]
    corpus.import_files([gum_file("test")], progress=False)         # the same layers: all their parts
    con = corpus.store.catalog_connection()
    stated = {p for (p,) in con.execute("SELECT path FROM part_stats").fetchall()}
    listed = {p for (p,) in con.execute("SELECT path FROM parts").fetchall()}
    con.close()
    assert stated == listed
    layers = corpus.store.layers()
    assert layers["word"].attrs["upos"].n_distinct == before.n_distinct == 17    # UD's 17 UPOS tags
