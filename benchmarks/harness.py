"""Query benchmark: the suite in benchmarks/queries/ on synthetic corpora at several scales.

Why: a query language is only worth its convenience if it costs little over SQL written by
hand, and an engine only if it beats what a practitioner would script without it. Each
suite entry ``NAME`` has

* ``NAME.query``: our language (timed in full, and as a listing of its first 20 hits);
* ``NAME.sql``: a hand-written DuckDB statement over the same layer views;
* ``NAME.floor.sql``: one scan of the columns the query must read (the floor);
* ``NAME.pandas.py``: a plain pandas script, ``run(layers) -> rows`` (see baselines.py).

For each scale the harness generates (or reuses) a synthetic corpus, imports it (or reuses
the import), runs every side ``runs`` times in one process, checks that strata, the hand SQL
and pandas return the same rows (as a multiset) and reports medians, spreads, ratios and
memory. A disagreement is a failure: exit code 1. Bad options or suite files: exit code 2.

    strata bench [--tokens 1e5 --tokens 1e6] [--runs 5] [--json F] [--plot F.png]
    python -m benchmarks.harness [queries] [same options]
    python -m benchmarks.harness import ...     (the import benchmark, benchmarks.import_bench)
    python -m benchmarks.harness synth ...      (the corpus generator, benchmarks.synth)
"""
from __future__ import annotations

import argparse
import json
import math
import os
import resource
import shutil
import statistics
import sys
import time
from collections import defaultdict
from dataclasses import dataclass
from pathlib import Path

from benchmarks import synth
from benchmarks.baselines import (ParquetLayers, comparable_rows, load_pandas_script, strip_output, timed,
                                  timed_pair)
from engine.errors import StrataError

QUERIES = Path(__file__).resolve().parent / "queries"
ALL_FORMATS = ("conllu", "brackets", "tiers", "spans")
IMPORT_MARKER = "bench-import.json"
LIMIT = 20


def default_cache() -> Path:
    """Where inputs and imported corpora are kept between runs ($STRATA_BENCH_CACHE wins)."""
    env = os.environ.get("STRATA_BENCH_CACHE")
    return Path(env) if env else Path.home() / ".cache" / "strata-bench"


@dataclass
class SuiteEntry:
    name: str
    query: str
    sql: str
    floor: str | None = None
    pandas: Path | None = None


class BenchError(StrataError):
    """A problem with the harness's input (suite files, options): exit code 2."""


def load_suite(folder: Path = QUERIES) -> list[SuiteEntry]:
    """Every NAME.query with its NAME.sql (required), floor and pandas files (optional), by name."""
    entries = []
    for q in sorted(folder.glob("*.query")):
        s = q.with_suffix(".sql")
        if not s.exists():
            raise BenchError(f"{q}: no hand-written {s.name} beside it")
        floor = q.with_suffix(".floor.sql")
        pandas = q.with_suffix(".pandas.py")
        entries.append(SuiteEntry(q.stem, q.read_text(encoding="utf-8"), s.read_text(encoding="utf-8"),
                                  floor.read_text(encoding="utf-8") if floor.exists() else None,
                                  pandas if pandas.exists() else None))
    if not entries:
        raise BenchError(f"{folder}: no *.query files")
    return entries


def corpus_input(tokens: int, seed: int, work: Path) -> tuple[Path, dict]:
    """The synthetic input for a scale, generated once and reused while the manifest matches."""
    folder = work / f"synth-v{synth.LAYOUT}-{tokens}-s{seed}"
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


def cached_corpus(tokens: int, seed: int, formats: list[str], work: Path, fresh: bool = False) -> dict:
    """Input and imported corpus for one scale, reused when an earlier run imported the same.

    The marker file is written only after every format imported, so an interrupted or failed
    import is never reused.
    """
    folder, manifest = corpus_input(tokens, seed, work)
    target = work / f"corpus-v{synth.LAYOUT}-{tokens}-s{seed}-{'-'.join(sorted(formats))}"
    marker = target / IMPORT_MARKER
    if not fresh and marker.exists():
        done = json.loads(marker.read_text(encoding="utf-8"))
        if done.get("manifest_seconds") == manifest["seconds"] and done.get("formats") == sorted(formats):
            return {"target": target, "manifest": manifest, "import": done["import"], "reused": True}
    imports = import_corpus(folder, manifest, target, formats)
    if all("seconds" in v for v in imports.values()):
        marker.write_text(json.dumps({"formats": sorted(formats), "manifest_seconds": manifest["seconds"],
                                      "import": imports}) + "\n", encoding="utf-8")
    return {"target": target, "manifest": manifest, "import": imports, "reused": False}


def _median_spread(times: list[float]) -> tuple[float, float]:
    return statistics.median(times), max(times) - min(times)


def _mb(n: int | None) -> float | None:
    return None if n is None else round(n / 2**20, 1)


def run_entry(con, store, e: SuiteEntry, runs: int, tokens: int) -> dict:
    """Every side of one suite entry on one connection: times, rows, agreement."""
    from engine.execute import compile_query, run_query

    r: dict = {"query": e.name, "tokens": tokens}
    try:
        compiled = compile_query(e.query, store)
        compile_times, _, _ = timed(lambda: compile_query(e.query, store), runs)
        # strata and the hand-written SQL alternate: their ratio is what the targets are about
        (s_times, hits, s_peak), (h_times, sql_rows, _) = timed_pair(
            lambda: run_query(con, store, e.query), lambda: con.execute(e.sql).fetchall(), runs)
        listing = strip_output(e.query)
        l_times, first, _ = timed(lambda: run_query(con, store, listing, limit=LIMIT), runs)
        # the same without keyword-in-context columns: shows what the context costs
        b_times, _, _ = timed(lambda: run_query(con, store, listing, limit=LIMIT, context=0), runs)
    except StrataError as err:
        r.update(status="skipped", reason=err.message)
        return r
    checked = compiled.state.checked
    r["layers"] = sorted({i.name for i in checked.layers.values()}
                         | {i.name for inner in checked.inner_layers for i in inner.values()})
    ours = comparable_rows(tuple(row.values()) for row in hits.rows())
    theirs = comparable_rows(sql_rows)
    r["strata_s"], r["strata_spread_s"] = _median_spread(s_times)
    r["hand_sql_s"], r["hand_sql_spread_s"] = _median_spread(h_times)
    r["compile_s"] = statistics.median(compile_times)
    r["limit20_s"] = statistics.median(l_times)
    r["limit20_rows"] = len(first)
    r["limit20_no_context_s"] = statistics.median(b_times)
    r["strata_peak_mb"] = _mb(s_peak)
    r["rows"] = len(ours)
    differences = {}
    if ours != theirs:
        differences["hand_sql"] = _first_difference(ours, theirs)
    if e.floor is not None:
        r["floor_s"], r["floor_spread_s"] = _median_spread(timed(lambda: con.execute(e.floor).fetchall(), runs)[0])
    else:
        r["floor_s"] = None
    if e.pandas is not None:
        run = load_pandas_script(e.pandas)
        layers = ParquetLayers(store)
        try:
            p_times, p_rows, p_peak = timed(lambda: run(layers), runs)
        except StrataError:
            raise
        except Exception as err:  # a bug in the baseline script: reported as a difference
            r["pandas_s"] = None
            differences["pandas"] = f"{type(err).__name__}: {err}"
        else:
            r["pandas_s"], r["pandas_spread_s"] = _median_spread(p_times)
            r["pandas_read_s"] = layers.read_seconds / runs
            r["pandas_peak_mb"] = _mb(p_peak)
            mine = comparable_rows(p_rows)
            if mine != ours:
                differences["pandas"] = _first_difference(ours, mine)
    else:
        r["pandas_s"] = None
    r["rows_equal"] = not differences
    r["status"] = "agree" if not differences else "DIFFER"
    if differences:
        r["differences"] = differences
    r["hand_ratio"] = _ratio(r["strata_s"], r["hand_sql_s"])
    r["floor_ratio"] = _ratio(r["strata_s"], r["floor_s"])
    r["pandas_ratio"] = _ratio(r["pandas_s"], r["strata_s"])
    return r


def _ratio(a: float | None, b: float | None) -> float | None:
    return a / b if a is not None and b else None


def _first_difference(ours: list, theirs: list) -> list:
    return next(([list(a), list(b)] for a, b in zip(ours, theirs) if a != b), [len(ours), len(theirs)])


def run_suite(target: Path, suite: list[SuiteEntry], runs: int, tokens: int = 0,
              advance=lambda n=1: None) -> dict:
    """All entries on one corpus: ``{"connect_s": ..., "records": [...]}``."""
    from engine.corpus import Corpus

    corpus = Corpus.open(target)
    t0 = time.perf_counter()
    con = corpus.connect()
    connect_s = time.perf_counter() - t0
    records = []
    try:
        for e in suite:
            records.append(run_entry(con, corpus.store, e, runs, tokens))
            advance(1)
    finally:
        con.close()
    return {"connect_s": connect_s, "records": records}


def _ms(v: float | None) -> str:
    return "" if v is None else f"{v * 1e3:.1f}"


def _x(v: float | None) -> str:
    return "" if v is None else f"{v:.2f}" if v < 10 else f"{v:.0f}"


def _pct(spread: float | None, median: float | None) -> str:
    return "" if spread is None or not median else f"{100 * spread / median:.0f}%"


TABLE_HEAD = ("query", "strata ms", "spread", "hand ms", "floor ms", "pandas ms", "/hand", "/floor",
              "pandas x", "limit20 ms", "no ctx ms", "rows", "MB strata/pandas", "result")


def table(report: dict) -> str:
    """Plain text: per scale the import line, then one row per query, then the summary."""
    lines = []
    for sc in report["scales"]:
        imp = ", ".join(f"{k} {v['seconds']:.1f} s" if "seconds" in v else f"{k} FAILED ({v['error']})"
                        for k, v in sc["import"].items())
        lines.append("")
        lines.append(f"{sc['tokens']:,} tokens ({report['runs']} runs each; spread = (max - min) / median): "
                     f"generated in {sc['generate_seconds']:.1f} s; import{' (reused)' if sc['reused'] else ''}: "
                     f"{imp}; connection with views {_ms(sc.get('connect_s'))} ms")
        rows = [TABLE_HEAD]
        for q in (r for r in report["records"] if r["tokens"] == sc["tokens"]):
            if q["status"] == "skipped":
                rows.append((q["query"],) + ("",) * (len(TABLE_HEAD) - 2) + ("skipped: " + q["reason"][:60],))
                continue
            mem = f"{q['strata_peak_mb'] if q['strata_peak_mb'] is not None else '?'}/" \
                  f"{q.get('pandas_peak_mb') if q.get('pandas_peak_mb') is not None else '?'}"
            rows.append((q["query"], _ms(q["strata_s"]), _pct(q["strata_spread_s"], q["strata_s"]),
                         _ms(q["hand_sql_s"]), _ms(q["floor_s"]), _ms(q["pandas_s"]), _x(q["hand_ratio"]),
                         _x(q["floor_ratio"]), _x(q["pandas_ratio"]), _ms(q["limit20_s"]),
                         _ms(q["limit20_no_context_s"]), str(q["rows"]), mem,
                         q["status"] + (f" ({', '.join(q['differences'])})" if q.get("differences") else "")))
        widths = [max(len(r[i]) for r in rows) for i in range(len(TABLE_HEAD))]
        left = (0, len(TABLE_HEAD) - 1)
        for r in rows:
            lines.append("  ".join(c.ljust(widths[i]) if i in left else c.rjust(widths[i])
                                   for i, c in enumerate(r)).rstrip())
    lines.append("")
    lines += summary_lines(report["summary"])
    return "\n".join(lines)


def summarise(records: list[dict]) -> dict:
    """Against the issue's targets (measured, never asserted): per scale and across scales."""
    out: dict = {"scales": {}, "growth": []}
    by_scale: dict[int, list[dict]] = defaultdict(list)
    for r in records:
        if r["status"] != "skipped":
            by_scale[r["tokens"]].append(r)
    for tokens, rs in sorted(by_scale.items()):
        hand = [r["hand_ratio"] for r in rs if r["hand_ratio"] is not None]
        multi = [r for r in rs if len(r.get("layers", ())) >= 2 and r["pandas_ratio"] is not None]
        out["scales"][tokens] = {
            "queries": len(rs),
            "rows_equal": sum(r["rows_equal"] for r in rs),
            "hand_ratio_median": statistics.median(hand) if hand else None,
            "hand_ratio_max": max(hand) if hand else None,
            "above_1_5": sorted(r["query"] for r in rs if (r["hand_ratio"] or 0) > 1.5),
            "pandas_ratio_min_multilayer": min((r["pandas_ratio"] for r in multi), default=None),
            "below_30x_multilayer": sorted(r["query"] for r in multi if r["pandas_ratio"] < 30),
            "limit20_over_full_median": statistics.median([r["limit20_s"] / r["strata_s"] for r in rs])
            if rs else None,
        }
    scales = sorted(by_scale)
    for lo, hi in zip(scales, scales[1:]):
        lo_t = {r["query"]: r["strata_s"] for r in by_scale[lo]}
        for r in by_scale[hi]:
            if r["query"] in lo_t and lo_t[r["query"]] > 0:
                growth = r["strata_s"] / lo_t[r["query"]]
                out["growth"].append({"query": r["query"], "from": lo, "to": hi, "time_ratio": growth,
                                      "exponent": math.log(growth) / math.log(hi / lo)})
    return out


def summary_lines(s: dict) -> list[str]:
    lines = []
    for tokens, v in s["scales"].items():
        f = lambda x: "n/a" if x is None else f"{x:.2f}"
        lines.append(f"{int(tokens):,} tokens: rows equal {v['rows_equal']}/{v['queries']}; strata/hand median "
                     f"{f(v['hand_ratio_median'])} (target <= 1.2), max {f(v['hand_ratio_max'])} (target <= 1.5)"
                     f"{'; above 1.5: ' + ', '.join(v['above_1_5']) if v['above_1_5'] else ''}; pandas/strata "
                     f"min over queries on 2+ layers {f(v['pandas_ratio_min_multilayer'])}x (target >= 30)"
                     f"{'; below 30x: ' + ', '.join(v['below_30x_multilayer']) if v['below_30x_multilayer'] else ''}"
                     f"; limit 20 / full query median {f(v['limit20_over_full_median'])}")
    pairs = sorted({(g["from"], g["to"]) for g in s["growth"]})
    for lo, hi in pairs:
        gs = [g for g in s["growth"] if (g["from"], g["to"]) == (lo, hi)]
        worst = max(gs, key=lambda g: g["exponent"])
        lines.append(f"growth {lo:,} -> {hi:,} tokens ({hi / lo:.0f}x): median time ratio "
                     f"{statistics.median(g['time_ratio'] for g in gs):.1f}x, worst {worst['query']} "
                     f"{worst['time_ratio']:.1f}x (exponent {worst['exponent']:.2f}; 1 = linear)")
    return lines


def run_bench(tokens: list[int], runs: int = 5, json_path: Path | None = None, plot_path: Path | None = None,
              formats: list[str] | None = None, seed: int = 1, work: Path | None = None,
              queries: Path = QUERIES, fresh: bool = False, progress: bool = True, out=sys.stdout) -> int:
    """The whole benchmark: build or reuse corpora, run the suite, print, write JSON and plot.

    Returns the exit code: 0, or 1 when any side returned different rows.
    """
    from engine.progress import step_progress

    if runs < 1:
        raise BenchError("--runs must be at least 1")
    formats = list(formats or ALL_FORMATS)
    work = work or default_cache()
    suite = load_suite(queries)
    for e in suite:   # a broken pandas script is an input error before anything is measured
        if e.pandas is not None:
            load_pandas_script(e.pandas)
    report = {"benchmark": "queries", "seed": seed, "runs": runs, "formats": formats, "scales": [], "records": []}
    for n in tokens:
        print(f"preparing {n:,} tokens in {work} ...", file=sys.stderr)
        c = cached_corpus(n, seed, formats, work, fresh)
        sc = {"tokens": c["manifest"]["tokens"], "requested_tokens": n,
              "generate_seconds": c["manifest"]["seconds"], "import": c["import"], "reused": c["reused"]}
        report["scales"].append(sc)
        if "error" in c["import"].get("conllu", {}):
            continue
        with step_progress(len(suite), f"{n:,} tokens", enabled=progress) as advance:
            res = run_suite(c["target"], suite, runs, sc["tokens"], advance)
        sc["connect_s"] = res["connect_s"]
        report["records"] += res["records"]
    report["summary"] = summarise(report["records"])
    report["peak_rss_mb"] = round(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024, 1)
    print(table(report), file=out)
    print(f"peak resident memory of the whole run: {report['peak_rss_mb']} MB", file=out)
    if json_path:
        Path(json_path).write_text(json.dumps(report, indent=1) + "\n", encoding="utf-8")
    if plot_path:
        from benchmarks.plot import plot_latency
        plot_latency(report, Path(plot_path))
    differ = sorted({r["query"] for r in report["records"] if r["status"] == "DIFFER"})
    if differ:
        print(f"results differ between strata, hand SQL and pandas: {', '.join(differ)}", file=sys.stderr)
        return 1
    return 0


def _tokens(text: str) -> list[int]:
    try:
        return [synth.token_count_arg(t.strip()) for t in text.split(",") if t.strip()]
    except (ValueError, argparse.ArgumentTypeError) as e:
        raise argparse.ArgumentTypeError(str(e)) from None


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
    ap.add_argument("--tokens", "--scales", dest="tokens", type=_tokens, action="append",
                    help="corpus size; repeat or give a comma list, e.g. 1e5,1e6 (default 1e5)")
    ap.add_argument("--formats", type=_formats, default=list(ALL_FORMATS), help="which layers to import (default all)")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--runs", "--repeat", dest="runs", type=int, default=5, help="runs of each side; the median counts")
    ap.add_argument("--work", "--cache", dest="work", type=Path, default=None,
                    help="folder for inputs and corpora (default $STRATA_BENCH_CACHE or ~/.cache/strata-bench)")
    ap.add_argument("--queries", type=Path, default=QUERIES, help="folder of the suite files")
    ap.add_argument("--fresh", action="store_true", help="import again even when a cached import matches")
    ap.add_argument("--json", type=Path, default=None, help="also write the report as JSON here")
    ap.add_argument("--plot", type=Path, default=None, help="draw latency against corpus size into this PNG")
    ap.add_argument("--no-progress", action="store_true", help="no progress bar on stderr")
    a = ap.parse_args(argv)
    tokens = [n for group in (a.tokens or [[100_000]]) for n in group]
    try:
        return run_bench(tokens, a.runs, a.json, a.plot, a.formats, a.seed, a.work, a.queries, a.fresh,
                         progress=not a.no_progress)
    except StrataError as e:
        print(f"query benchmark: {e}", file=sys.stderr)
        return 2


if __name__ == "__main__":
    sys.exit(main())
