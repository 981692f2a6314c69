"""The query suite on the open treebank replicated to a million tokens (issue 3's measurement).

The synthetic corpora of :mod:`benchmarks.harness` carry every layer kind; this one is real
data: the dev and test splits of ../shared/data/ud-english-gum, copied (in a temporary or
cache folder, never into the repository) by :func:`benchmarks.import_bench.replicate` until
``--tokens`` is reached, imported once, then every suite query whose layers it has runs
against its hand-written SQL, the scan floor and the pandas script, as in the harness.
Queries over layers the treebank lacks (trees, tiers, disfluencies) are listed as skipped.

    python -m benchmarks.treebank_queries --tokens 1000000 --runs 5
"""
from __future__ import annotations

import argparse
import json
import sys
import time
from pathlib import Path

from benchmarks import harness
from benchmarks.import_bench import DEFAULT_DATA, replicate
from engine import Corpus, StrataError


def treebank_corpus(tokens: int, work: Path, data: Path = DEFAULT_DATA) -> tuple[Path, float | None]:
    """The replicated treebank imported under ``work`` (reused when complete); import seconds."""
    target = work / f"treebank-{tokens}"
    marker = target / harness.IMPORT_MARKER
    if marker.exists():
        return target, None
    copies = work / f"treebank-{tokens}-files"
    copies.mkdir(parents=True, exist_ok=True)
    files, _ = replicate(data, tokens, copies)
    if target.exists():
        import shutil
        shutil.rmtree(target)
    t0 = time.perf_counter()
    Corpus.create(target).import_files(files, progress=False)
    seconds = time.perf_counter() - t0
    marker.write_text(json.dumps({"import_seconds": seconds}) + "\n", encoding="utf-8")
    return target, seconds


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(prog="python -m benchmarks.treebank_queries", description=__doc__.split("\n\n")[0])
    ap.add_argument("--tokens", type=lambda s: int(float(s)), default=1_000_000)
    ap.add_argument("--runs", type=int, default=5)
    ap.add_argument("--work", type=Path, default=None, help="cache folder (default as the harness)")
    ap.add_argument("--json", type=Path, default=None)
    a = ap.parse_args(argv)
    work = a.work or harness.default_cache()
    try:
        target, seconds = treebank_corpus(a.tokens, work)
    except StrataError as e:
        print(f"treebank benchmark: {e}", file=sys.stderr)
        return 2
    result = harness.run_suite(target, harness.load_suite(), a.runs, a.tokens)
    report = {"runs": a.runs, "records": result["records"], "summary": harness.summarise(result["records"]),
              "scales": [{"tokens": a.tokens, "generate_seconds": 0.0, "reused": seconds is None,
                          "import": {"conllu": {"seconds": seconds or 0.0}}, "connect_s": result["connect_s"]}]}
    print(harness.table(report))
    if a.json:
        a.json.write_text(json.dumps(report["records"], indent=1, default=str) + "\n", encoding="utf-8")
    return 1 if any(r.get("status") == "DIFFER" for r in result["records"]) else 0


if __name__ == "__main__":
    sys.exit(main())
