"""Exact times: every duration and gap from 1 to 2,000 ms compared with the five operators,
against integer truth: 0 wrong.

The text is the open treebank's first sentences (read in place); a tier table written here puts
its surface tokens on a time line whose gaps run through 1..2000 ms, and 2,000 pauses whose
durations are 1..2000 ms, all written as decimal seconds from an offset of 1000 s (where binary
floating point cannot hold most millisecond values exactly). The truth is the integer number
of milliseconds each row was written with.

Each operator's query is compiled once by strata; its threshold is a bound parameter, which
the sweep sets to every value from 1 to 2000 ms (the same SQL and parameters strata runs).
"""
from __future__ import annotations

import operator
import random
from bisect import bisect_left, bisect_right
from concurrent.futures import ThreadPoolExecutor

import conllu
import pytest

from engine import Corpus
from engine.execute import compile_query
from tests.conftest import first_gum_sentences

OPS = {"=": operator.eq, "<": operator.lt, "<=": operator.le, ">": operator.gt, ">=": operator.ge}
N = 2000
OFFSET_MS = 1_000_000             # 1000 s


def text_seconds(ms: int) -> str:
    return f"{ms // 1000}.{ms % 1000:03d}"


@pytest.fixture(scope="module")
def timed(tmp_path_factory):
    """(corpus, gaps in ms between consecutive spoken words of one document, pause durations in ms,
    each document's spoken words as (start, end) in ms)."""
    root = tmp_path_factory.mktemp("exact")
    source = first_gum_sentences(root, 180)
    docs: dict[str, list[str]] = {}
    doc = None
    for sentence in conllu.parse(source.read_text(encoding="utf-8")):
        doc = sentence.metadata.get("newdoc id", doc)
        covered: set[int] = set()
        for t in sentence:
            if isinstance(t["id"], tuple) and t["id"][1] == "-":
                covered.update(range(t["id"][0], t["id"][2] + 1))
                docs.setdefault(doc, []).append(t["form"])
            elif isinstance(t["id"], int) and t["id"] not in covered and t["upos"] != "PUNCT":
                docs.setdefault(doc, []).append(t["form"])
    rows, gaps, k = [], [], 0
    spans: dict[str, list[tuple[int, int]]] = {}
    for name, forms in docs.items():
        t = OFFSET_MS
        for i, form in enumerate(forms):
            if i:
                gap = k % N + 1
                k += 1
                gaps.append(gap)
                t += gap
            rows.append(f"{name}\tspoken\t{text_seconds(t)}\t{text_seconds(t + 137)}\t{form.lower()}\n")
            spans.setdefault(name, []).append((t, t + 137))
            t += 137
    assert len(gaps) >= N                                     # every gap from 1 to 2000 ms occurs
    durations = list(range(1, N + 1))
    random.Random(7).shuffle(durations)
    first = next(iter(docs))
    t = OFFSET_MS + 10_000_000                                # after every word of that document
    for d in durations:
        rows.append(f"{first}\tpauses\t{text_seconds(t)}\t{text_seconds(t + d)}\tsil\n")
        t += d + 3
    tiers = root / "sweep.tiers.tsv"
    tiers.write_text("doc\ttier\tstart\tend\tlabel\n" + "".join(rows), encoding="utf-8")
    corpus = Corpus.create(root / "corpus")
    corpus.import_files([source], progress=False)
    corpus.import_files([tiers], progress=False)
    return corpus, gaps, durations, spans


def sweep(corpus: Corpus, template: str, values: list[int], ops: dict | None = None) -> dict[str, int]:
    """Wrong counts per operator over thresholds 1..N ms (0 everywhere when times are exact);
    the thresholds run on two cursors at once (DuckDB releases the GIL), half each."""
    con = corpus._query_connection()
    ordered = sorted(values)
    n = len(ordered)
    # integer truth: how many values stand in each relation to ms (bisect on the sorted values)
    truth = {"<": lambda ms: bisect_left(ordered, ms), "<=": lambda ms: bisect_right(ordered, ms),
             "=": lambda ms: bisect_right(ordered, ms) - bisect_left(ordered, ms),
             ">": lambda ms: n - bisect_right(ordered, ms), ">=": lambda ms: n - bisect_left(ordered, ms)}
    assert all(truth[op](ms) == sum(1 for v in values if fn(v, ms)) for op, fn in OPS.items() for ms in (1, 999, N))
    wrong = {}
    for op in ops or OPS:
        compiled = compile_query(template.format(op=op, ms=1), corpus.store)
        at = [i for i, p in enumerate(compiled.params) if p == 1000]       # 1 ms as whole microseconds
        assert len(at) == 1, compiled.params

        def part(thresholds: range) -> int:
            cur, params, bad = con.cursor(), list(compiled.params), 0
            for ms in thresholds:
                params[at[0]] = ms * 1000
                got = cur.execute(compiled.sql, params).fetchone()[0]
                bad += got != truth[op](ms)
            cur.close()
            return bad
        with ThreadPoolExecutor(2) as pool:
            wrong[op] = sum(pool.map(part, (range(1, N + 1, 2), range(2, N + 1, 2))))
    return wrong


def test_every_duration_from_1_to_2000_ms(timed):
    corpus, _, durations, _ = timed
    wrong = sweep(corpus, "find p = pauses where p.duration {op} {ms}ms count", durations)
    assert wrong == {op: 0 for op in OPS}


def test_every_gap_from_1_to_2000_ms(timed):
    corpus, gaps, _, _ = timed
    wrong = sweep(corpus, "find a = spoken, b = spoken where a directly precedes b and gap(a, b) {op} {ms}ms count",
                  gaps)
    assert wrong == {op: 0 for op in OPS}


def test_durations_print_as_the_decimals_written(timed):
    corpus, _, durations, _ = timed
    shown = corpus.query("find p = pauses show p.duration").rows()
    assert sorted(r["p.duration"] for r in shown) == [d / 1000 for d in range(1, N + 1)]
    assert {repr(r["p.duration"]) for r in shown} == {repr(d / 1000) for d in durations}
    assert all(len(repr(r["p.start"])) <= 11 for r in shown)           # e.g. 1010.123, never noise


def test_time_bounds_hold_at_every_boundary_from_1_to_2000_ms(timed):
    """``a before b by at most T``: Allen's before and a gap of at most T, for every T from 1 to
    2000 ms; a gap equal to the bound is inside it (each T is some pair's gap). The truth is
    every pair of spoken words of one document whose integer gap is 1..2000 ms; ``by at least T
    and at most 2000ms`` counts the pairs from T up. ``b after a`` gives the same counts."""
    corpus, _, _, spans = timed
    pair_gaps = [s2 - e1 for words in spans.values() for i, (_, e1) in enumerate(words)
                 for s2, _ in words[i + 1:] if 0 < s2 - e1 <= N]
    assert set(range(1, N + 1)) <= set(pair_gaps)
    for template, op in (("find a = spoken, b = spoken where a before b by at most {ms}ms count", "<="),
                         ("find a = spoken, b = spoken where b after a by at most {ms}ms count", "<="),
                         ("find a = spoken, b = spoken where a before b by at least {ms}ms and at most 2s count",
                          ">=")):
        wrong = sweep(corpus, template, pair_gaps, {op: OPS[op]})
        assert wrong == {op: 0}, template


def test_a_bound_in_seconds_is_the_same_bound_in_ms(timed):
    corpus = timed[0]
    count = lambda bound: corpus.query(f"find a = spoken, b = spoken where a before b {bound} count").rows()[0]["count"]  # noqa: E731
    assert count("by at most 1.5s") == count("by at most 1500ms") > count("by at most 1499ms")
    assert count("by at least 0.25s and at most 0.5s") == count("by at least 250ms and at most 500ms") > 0


def test_a_tolerance_holds_at_its_boundary(timed):
    """``a meets b give or take T``: a's end and b's start differ by at most T (Allen's meets with
    a tolerance). Checked at T = d - 1, d and d + 1 ms for differences d that occur, against every
    ordered pair of two spoken words of one document (a word never meets itself, though its
    end and start differ by its 137 ms); with no tolerance, no word meets another."""
    corpus, _, _, spans = timed
    diffs = sorted(abs(s2 - e1) for words in spans.values() for i, (_, e1) in enumerate(words)
                   for j, (s2, _) in enumerate(words) if i != j and abs(s2 - e1) <= N + 1)
    con = corpus._query_connection()
    compiled = compile_query("find a = spoken, b = spoken where a meets b give or take 1ms count", corpus.store)
    at = compiled.params.index(1000)
    rng = random.Random(11)
    for d in [1, 2, 137, N] + rng.sample(diffs, 12):
        for t in (d - 1, d, d + 1):
            params = list(compiled.params)
            params[at] = t * 1000
            if t:
                assert con.execute(compiled.sql, params).fetchone()[0] == bisect_right(diffs, t), t
    assert corpus.query("find a = spoken, b = spoken where a meets b count").rows()[0]["count"] == 0
