"""Query benchmark: the suite in benchmarks/queries/ on synthetic corpora at several scales.

Why: a query language is only worth its convenience if it costs little over SQL written by
hand. Each suite entry is a pair ``NAME.query`` (our language) and ``NAME.sql`` (a
hand-written DuckDB statement over the same layer views, from the documented semantics).
For each scale the harness generates (or reuses) a synthetic corpus, imports it, runs both
sides of every pair, checks that they return the same rows (as a multiset) and reports the
times. A disagreement is a failure: exit code 1.

    python -m benchmarks.harness [queries] [--scales 1e5,1e6] [--formats conllu,brackets,tiers,spans]
                                 [--repeat 3] [--work DIR] [--reuse] [--json out.json]
    python -m benchmarks.harness import ...     (the import benchmark, benchmarks.import_bench)
    python -m benchmarks.harness synth ...      (the corpus generator, benchmarks.synth)
"""
from __future__ import annotations

import argparse
import json
import shutil
import statistics
import sys
import time
from collections import defaultdict
from dataclasses import dataclass
from pathlib import Path

from benchmarks import synth
from engine.errors import StrataError

QUERIES = Path(__file__).resolve().parent / "queries"
DEFAULT_WORK = Path("strata-bench")
ALL_FORMATS = ("conllu", "brackets", "tiers", "spans")


@dataclass
class SuiteEntry:
    name: str
    query: str
    sql: str


class BenchError(StrataError):
    """A problem with the harness's input (suite files, options): exit code 2."""


def load_suite(folder: Path = QUERIES) -> list[SuiteEntry]:
    """Every NAME.query with its NAME.sql, in name order."""
    entries = []
    for q in sorted(folder.glob("*.query")):
        s = q.with_suffix(".sql")
        if not s.exists():
            raise BenchError(f"{q}: no hand-written {s.name} beside it")
        entries.append(SuiteEntry(q.stem, q.read_text(encoding="utf-8"), s.read_text(encoding="utf-8")))
    if not entries:
        raise BenchError(f"{folder}: no *.query files")
    return entries


def corpus_input(tokens: int, seed: int, work: Path) -> tuple[Path, dict]:
    """The synthetic input for a scale, generated once and reused while the manifest matches."""
    folder = work / f"synth-{tokens}-s{seed}"
    manifest = folder / "manifest.json"
    if manifest.exists():
        m = json.loads(manifest.read_text(encoding="utf-8"))
        if m.get("requested_tokens") == tokens and m.get("seed") == seed:
            return folder, m
    shutil.rmtree(folder, ignore_errors=True)
    return folder, synth.generate(tokens, folder, seed=seed)


def import_corpus(folder: Path, manifest: dict, target: Path, formats: list[str]) -> dict:
    """Imports the chosen formats in manifest order; seconds per format (or the error)."""
    from engine.corpus import Corpus
    from engine.errors import StrataError

    shutil.rmtree(target, ignore_errors=True)
    corpus = Corpus.create(target)
    groups: dict[tuple[str, str], list[Path]] = defaultdict(list)
    for f in manifest["files"]:
        if f["format"] in formats:
            groups[f["format"], json.dumps(f["options"], sort_keys=True)].append(folder / f["path"])
    out = {}
    for (fmt, opts), files in groups.items():
        t0 = time.perf_counter()
        try:
            corpus.import_files(files, format=fmt, progress=False, **json.loads(opts))
            out[fmt] = {"seconds": round(time.perf_counter() - t0, 3)}
        except StrataError as e:
            out[fmt] = {"error": str(e).splitlines()[0]}
        except Exception as e:  # an importer bug: report it and measure the rest
            out[fmt] = {"error": f"{type(e).__name__}: {str(e).splitlines()[0] if str(e) else ''}"}
    return out


def _rows(values) -> list[tuple]:
    """Rows comparable across both sides: values as text, order ignored."""
    return sorted(tuple("" if v is None else str(v) for v in row) for row in values)


def _timed(fn, repeat: int) -> tuple[list[float], object]:
    times, result = [], None
    for _ in range(repeat):
        t0 = time.perf_counter()
        result = fn()
        times.append(time.perf_counter() - t0)
    return times, result


def run_suite(target: Path, suite: list[SuiteEntry], repeat: int) -> list[dict]:
    """Both sides of every entry on one corpus: times (median of `repeat`), rows, agreement."""
    from engine.corpus import Corpus
    from engine.errors import StrataError
    from engine.execute import compile_query, run_query

    corpus = Corpus.open(target)
    connect_times, con = _timed(corpus.connect, 1)
    results = []
    for e in suite:
        r: dict = {"query": e.name}
        try:
            compile_times, _ = _timed(lambda: compile_query(e.query, corpus.store), repeat)
            # On the same connection as the SQL, so both sides pay the same set-up.
            q_times, hits = _timed(lambda: run_query(con, corpus.store, e.query), repeat)
        except StrataError as err:
            r.update(status="skipped", reason=err.message)
            results.append(r)
            continue
        s_times, sql_rows = _timed(lambda: con.execute(e.sql).fetchall(), repeat)
        ours = _rows(tuple(row.values()) for row in hits.rows())
        theirs = _rows(sql_rows)
        r.update(status="agree" if ours == theirs else "DIFFER",
                 compile_ms=statistics.median(compile_times) * 1e3,
                 query_ms=statistics.median(q_times) * 1e3,
                 sql_ms=statistics.median(s_times) * 1e3, rows=len(ours))
        r["overhead"] = r["query_ms"] / r["sql_ms"] if r["sql_ms"] > 0 else None
        if ours != theirs:
            r["first_difference"] = next(([a, b] for a, b in zip(ours, theirs) if a != b),
                                         [len(ours), len(theirs)])
        results.append(r)
    con.close()
    return [{"query": "(open a connection with the layer views)", "status": "setup",
             "connect_ms": connect_times[0] * 1e3}] + results


def table(report: dict) -> str:
    """Plain-text tables: imports per scale, then one line per query and scale."""
    lines = []
    for sc in report["scales"]:
        imp = ", ".join(f"{k} {v['seconds']:.1f} s" if "seconds" in v else f"{k} FAILED ({v['error']})"
                        for k, v in sc["import"].items())
        lines.append(f"{sc['tokens']:,} tokens: generated in {sc['generate_seconds']:.1f} s; import: {imp}")
    head = ("query", "tokens", "ours ms", "sql ms", "x sql", "compile ms", "rows", "result")
    rows = [head]
    for sc in report["scales"]:
        for q in sc["queries"]:
            if q["status"] == "setup":
                rows.append((q["query"], f"{sc['tokens']:,}", f"{q['connect_ms']:.1f}", "", "", "", "", ""))
                continue
            if q["status"] == "skipped":
                rows.append((q["query"], f"{sc['tokens']:,}", "", "", "", "", "", "skipped: " + q["reason"][:50]))
                continue
            rows.append((q["query"], f"{sc['tokens']:,}", f"{q['query_ms']:.1f}", f"{q['sql_ms']:.1f}",
                         f"{q['overhead']:.2f}" if q["overhead"] else "", f"{q['compile_ms']:.1f}",
                         str(q["rows"]), q["status"]))
    widths = [max(len(r[i]) for r in rows) for i in range(len(head))]
    for r in rows:
        lines.append("  ".join(c.ljust(widths[i]) if i in (0, 7) else c.rjust(widths[i]) for i, c in enumerate(r)))
    return "\n".join(lines)


def _scales(text: str) -> list[int]:
    return [synth.token_count_arg(t.strip()) for t in text.split(",") if t.strip()]


def _formats(text: str) -> list[str]:
    fmts = [t.strip() for t in text.split(",") if t.strip()]
    unknown = [f for f in fmts if f not in ALL_FORMATS]
    if unknown or "conllu" not in fmts:
        raise argparse.ArgumentTypeError(
            f"formats are a comma list of {', '.join(ALL_FORMATS)} including conllu (it holds the text)")
    return fmts


def main(argv: list[str] | None = None) -> int:
    """The query benchmark; a first word `import` or `synth` runs those benchmarks instead."""
    argv = sys.argv[1:] if argv is None else list(argv)
    if argv[:1] == ["import"]:
        from benchmarks import import_bench
        return import_bench.main(argv[1:])
    if argv[:1] == ["synth"]:
        return synth.main(argv[1:])
    if argv[:1] == ["queries"]:
        argv = argv[1:]
    return queries_main(argv)


def queries_main(argv: list[str]) -> int:
    ap = argparse.ArgumentParser(prog="python -m benchmarks.harness [queries]",
                                 description=__doc__.split("\n\n")[0],
                                 epilog="Other benchmarks: `import` (see benchmarks.import_bench) "
                                        "and `synth` (see benchmarks.synth) as the first word.")
    ap.add_argument("--scales", type=_scales, default=[100_000], help="token counts, e.g. 1e5,1e6")
    ap.add_argument("--formats", type=_formats, default=list(ALL_FORMATS),
                    help="which layers to import (default all)")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--repeat", type=int, default=3, help="runs of each side; the median counts")
    ap.add_argument("--work", type=Path, default=DEFAULT_WORK, help="folder for inputs and corpora")
    ap.add_argument("--queries", type=Path, default=QUERIES, help="folder of NAME.query + NAME.sql")
    ap.add_argument("--reuse", action="store_true", help="query an imported corpus again, without importing")
    ap.add_argument("--json", type=Path, default=None, help="also write the report as JSON here")
    a = ap.parse_args(argv)
    if a.repeat < 1:
        ap.error("--repeat must be at least 1")
    try:
        suite = load_suite(a.queries)
    except BenchError as e:
        print(f"query benchmark: {e}", file=sys.stderr)
        return 2
    report = {"benchmark": "queries", "seed": a.seed, "repeat": a.repeat, "formats": a.formats, "scales": []}
    for tokens in a.scales:
        folder, manifest = corpus_input(tokens, a.seed, a.work)
        target = a.work / f"corpus-{tokens}-s{a.seed}"
        if a.reuse and (target / "catalog.duckdb").exists():
            imports = {"reused": {"seconds": 0.0}}
        else:
            imports = import_corpus(folder, manifest, target, a.formats)
        ok = "error" not in imports.get("conllu", {})
        report["scales"].append({"tokens": manifest["tokens"], "generate_seconds": manifest["seconds"],
                                 "import": imports, "queries": run_suite(target, suite, a.repeat) if ok else []})
    print(table(report))
    if a.json:
        a.json.write_text(json.dumps(report, indent=1) + "\n", encoding="utf-8")
    differ = [q["query"] for sc in report["scales"] for q in sc["queries"] if q["status"] == "DIFFER"]
    if differ:
        print(f"results differ from the hand-written SQL: {', '.join(sorted(set(differ)))}", file=sys.stderr)
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
