"""Import benchmark: strata's full CoNLL-U import against the `conllu` library's parse alone.

Why: importing must not be the slow step of working with a corpus. The open treebank in
../shared/data/ud-english-gum/ is replicated to at least a million tokens (each copy's
documents and sentence ids get a copy suffix, so names stay unique), then in the same run

* ``conllu``: ``conllu.parse_incr`` over every file (parsing only, nothing kept), and
* ``strata``: ``Corpus.create(...).import_files(...)`` end to end (parse, anchors, trees,
  mentions, Parquet parts, catalog, commit).

Each measurement runs in a child process of its own, so the peak resident memory it reports
(``ru_maxrss`` of that process, plus that of its own largest child: strata's import runs the
part of a big input in a second process) belongs to that measurement alone. Times are of the
work only; interpreter start and module imports are excluded from both (strata's second
process starts inside the timed work, so its start is included). pyarrow imports pandas,
when it is installed, on its first conversion of a Python object; that import is timed
apart and reported as ``pandas_import_s`` (0.1-0.3 s here), once per process. Goal (issue 2):
strata at least 3x faster than the parse alone.

    python -m benchmarks.import_bench [--tokens 1000000] [--repeat 1] [--json out.json]
"""
from __future__ import annotations

import argparse
import json
import math
import os
import platform
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from benchmarks.synth import token_count_arg
from engine.errors import StrataError

GOAL_RATIO = 3.0
DEFAULT_DATA = Path(__file__).resolve().parents[1].parent / "shared" / "data" / "ud-english-gum"
COPY_SUFFIX = "__copy{}"


class BenchError(StrataError):
    """A problem with the benchmark's input (missing treebank, bad option): exit code 2."""


def count_tokens(path: Path) -> int:
    """Syntactic words: lines whose ID is a plain integer (no ranges, no empty nodes)."""
    n = 0
    with open(path, encoding="utf-8") as f:
        for line in f:
            if line[:1].isdigit():
                head = line.split("\t", 1)[0]
                if head.isdigit():
                    n += 1
    return n


def _rename(line: str, suffix: str, doc: str | None) -> tuple[str, str | None]:
    """One line of a copy: newdoc and sent_id comments get the suffix; the rest is verbatim."""
    if line.startswith("# newdoc id ="):
        doc = line.split("=", 1)[1].strip()
        return f"# newdoc id = {doc}{suffix}\n", doc
    if line.startswith("# sent_id ="):
        sid = line.split("=", 1)[1].strip()
        if doc and sid.startswith(doc):
            sid = f"{doc}{suffix}{sid[len(doc):]}"
        else:
            sid = sid + suffix
        return f"# sent_id = {sid}\n", doc
    return line, doc


def replicate(data: Path, tokens: int, out: Path) -> tuple[list[Path], int]:
    """Copies of the treebank's .conllu files in `out`, enough for `tokens`; (files, tokens)."""
    sources = sorted(data.glob("*.conllu"))
    if not sources:
        raise BenchError(f"{data}: no .conllu files (the treebank is expected there, read-only)")
    per_copy = sum(count_tokens(p) for p in sources)
    copies = max(1, math.ceil(tokens / per_copy))
    out.mkdir(parents=True, exist_ok=True)
    files = []
    for c in range(copies):
        suffix = COPY_SUFFIX.format(c)
        for src in sources:
            dst = out / f"{src.stem}{suffix}.conllu"
            doc = None
            with open(src, encoding="utf-8") as fin, open(dst, "w", encoding="utf-8", newline="") as fout:
                for line in fin:
                    if line.startswith("# "):
                        line, doc = _rename(line, suffix, doc)
                    fout.write(line)
            files.append(dst)
    return files, per_copy * copies


# --- measurements, each in a child process --------------------------------------------------

def _measure_conllu(files: list[str], _work: str) -> dict:
    import conllu
    t0 = time.perf_counter()
    n = 0
    for path in files:
        with open(path, encoding="utf-8") as f:
            for sentence in conllu.parse_incr(f):
                n += sum(1 for t in sentence if isinstance(t["id"], int))
    return {"seconds": time.perf_counter() - t0, "tokens": n}


def _measure_strata(files: list[str], work: str) -> dict:
    import pyarrow as pa
    from engine.corpus import Corpus
    import engine.importers.conllu_parallel  # noqa: F401  (module imports are excluded on both sides)
    # pyarrow imports pandas, when it is installed, on its first conversion of a Python
    # object: a module import too, timed apart and reported (``pandas_import_s``)
    t = time.perf_counter()
    pa.array([0])
    pandas_import = time.perf_counter() - t
    target = Path(work) / "corpus"
    t0 = time.perf_counter()
    corpus = Corpus.create(target)
    corpus.import_files(files, format="conllu", progress=False)
    seconds = time.perf_counter() - t0
    con = corpus.connect()
    n = con.execute('SELECT count(*) FROM "word"').fetchone()[0]
    con.close()
    size = sum(p.stat().st_size for p in target.rglob("*") if p.is_file())
    return {"seconds": seconds, "tokens": n, "store_bytes": size, "pandas_import_s": pandas_import}


MEASUREMENTS = {"conllu": _measure_conllu, "strata": _measure_strata}


def _child(name: str, files_list: str, work: str) -> None:
    files = Path(files_list).read_text(encoding="utf-8").splitlines()
    result = MEASUREMENTS[name](files, work)
    # ru_maxrss is in KiB on Linux, in bytes on macOS.
    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss + resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    result["peak_rss_mb"] = rss / (1 << 20) if sys.platform == "darwin" else rss / 1024
    print(json.dumps(result))


def run_child(name: str, files: list[Path], work: Path) -> dict:
    """Runs one measurement in a fresh interpreter and returns what it reported."""
    work.mkdir(parents=True, exist_ok=True)
    listing = work / "files.txt"
    listing.write_text("\n".join(str(f) for f in files), encoding="utf-8")
    repo = str(Path(__file__).resolve().parents[1])
    env = dict(os.environ, PYTHONPATH=repo + os.pathsep + os.environ.get("PYTHONPATH", ""))
    t0 = time.perf_counter()
    proc = subprocess.run([sys.executable, "-m", "benchmarks.import_bench", "--child", name,
                           str(listing), str(work)], capture_output=True, text=True, env=env, cwd=repo)
    wall = time.perf_counter() - t0
    if proc.returncode != 0:
        raise BenchError(f"the {name} measurement failed (exit {proc.returncode}):\n{proc.stderr.strip()}")
    result = json.loads(proc.stdout.strip().splitlines()[-1])
    result["wall_seconds"] = wall
    return result


def benchmark(tokens: int, data: Path = DEFAULT_DATA, repeat: int = 1, keep: Path | None = None) -> dict:
    """Replicates the treebank and times both sides `repeat` times (best time and its memory)."""
    if not data.is_dir():
        raise BenchError(f"{data}: treebank not found (expected the CoNLL-U splits there)")
    with tempfile.TemporaryDirectory(prefix="strata-import-bench-") as tmp:
        root = keep or Path(tmp)
        files, n_tokens = replicate(data, tokens, root / "input")
        runs: dict[str, list[dict]] = {"conllu": [], "strata": []}
        for i in range(repeat):
            for name in ("conllu", "strata"):
                work = root / f"{name}-{i}"
                runs[name].append(run_child(name, files, work))
        best = {name: min(rs, key=lambda r: r["seconds"]) for name, rs in runs.items()}
        input_bytes = sum(f.stat().st_size for f in files)
    if best["conllu"]["tokens"] != n_tokens or best["strata"]["tokens"] != n_tokens:
        raise BenchError(f"token counts disagree: input {n_tokens}, conllu {best['conllu']['tokens']}, "
                         f"strata {best['strata']['tokens']}")
    ratio = best["conllu"]["seconds"] / best["strata"]["seconds"]
    return {
        "benchmark": "import", "tokens": n_tokens, "files": len(files), "input_bytes": input_bytes,
        "repeat": repeat, "conllu": best["conllu"], "strata": best["strata"],
        "all_seconds": {k: [round(r["seconds"], 3) for r in v] for k, v in runs.items()},
        "ratio": ratio, "goal_ratio": GOAL_RATIO, "goal_met": ratio >= GOAL_RATIO,
        "python": platform.python_version(), "cpus": os.cpu_count(), "machine": platform.machine(),
        "when": time.strftime("%Y-%m-%dT%H:%M:%S"),
    }


def table(r: dict) -> str:
    """A small plain-text table of one benchmark result."""
    rows = [("", "seconds", "tokens/s", "peak RSS MB")]
    for name, label in (("conllu", "conllu.parse_incr (parse only)"), ("strata", "strata import (end to end)")):
        m = r[name]
        rows.append((label, f"{m['seconds']:.2f}", f"{m['tokens'] / m['seconds']:,.0f}", f"{m['peak_rss_mb']:.0f}"))
    widths = [max(len(row[i]) for row in rows) for i in range(4)]
    lines = ["  ".join(c.ljust(widths[0]) if i == 0 else c.rjust(widths[i]) for i, c in enumerate(row))
             for row in rows]
    verdict = "met" if r["goal_met"] else "NOT met"
    lines.append(f"{r['tokens']:,} tokens in {r['files']} files ({r['input_bytes'] / 1e6:.0f} MB); "
                 f"strata is {r['ratio']:.2f}x the speed of the parse alone (goal >= {r['goal_ratio']:.0f}x: {verdict})")
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> int:
    argv = sys.argv[1:] if argv is None else argv
    if argv[:1] == ["--child"]:
        _child(*argv[1:4])
        return 0
    ap = argparse.ArgumentParser(prog="python -m benchmarks.import_bench", description=__doc__.split("\n\n")[0])
    ap.add_argument("--tokens", type=token_count_arg, default=1_000_000, help="at least this many tokens (default 1e6)")
    ap.add_argument("--repeat", type=int, default=1, help="runs of each side; the best counts")
    ap.add_argument("--data", type=Path, default=DEFAULT_DATA, help="folder with the treebank's .conllu files")
    ap.add_argument("--keep", type=Path, default=None, help="keep the replicated input and stores here")
    ap.add_argument("--json", type=Path, default=None, help="also write the result as JSON here")
    a = ap.parse_args(argv)
    if a.repeat < 1:
        ap.error("--repeat must be at least 1")
    try:
        r = benchmark(a.tokens, a.data, a.repeat, a.keep)
    except BenchError as e:
        print(f"import benchmark: {e}", file=sys.stderr)
        return 2
    print(table(r))
    if a.json:
        a.json.write_text(json.dumps(r, indent=1) + "\n", encoding="utf-8")
    return 0


if __name__ == "__main__":
    sys.exit(main())
