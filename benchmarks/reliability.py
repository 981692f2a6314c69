"""Reliability harness: crashes, races and readers against a corpus, with real processes.

    python -m benchmarks.reliability --kill 20 --races 20 --readers 4 [--imports 10] [--interrupts 20]

* **kill**: an import killed with SIGKILL at a random moment (``--kill`` times) and at each named
  step of the commit (``store.COMMIT_STEPS``, via ``STRATA_KILL_AT``); afterwards the corpus
  must be in the old state or the new one, and the next import must succeed and leave nothing
  unlisted on disk.
* **races**: pairs of imports started together; each pair must end in one success and one
  clean refusal (exit 2, "being written by process"), or in two successes when the first had
  finished before the second began.
* **readers**: reader processes query in a loop during ``--imports`` imports; every answer
  must equal the word count of one committed state.
* **interrupts**: SIGINT at random moments of a slow query (``--interrupts`` times): exit 130
  within a second, one line on stderr, no traceback.
* **fuzz**: ``--fuzz N`` queries from the grammar-aware fuzzer (:mod:`benchmarks.query_fuzz`):
  every one must end in a result or an error that shows its place.  Given alone, ``--fuzz``
  runs only this campaign: ``python -m benchmarks.reliability --fuzz 100000``.

The inputs are the open treebank's two splits (UD English GUM) read in place.  Prints one line
per check and a summary; exit 1 when anything failed.
"""
from __future__ import annotations

import argparse
import random
import signal
import subprocess
import sys
import tempfile
import time
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
GUM = REPO.parent / "shared" / "data" / "ud-english-gum"
COUNT = "find t = word count"


def strata(*args: str, env: dict | None = None) -> subprocess.Popen:
    import os
    return subprocess.Popen([sys.executable, "-m", "engine.cli", *args], cwd=REPO, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, env={**os.environ, **(env or {})})


def finish(proc: subprocess.Popen, timeout: float = 600) -> tuple[int, str, str]:
    out, err = proc.communicate(timeout=timeout)
    return proc.returncode, out, err


def state(root: Path) -> tuple[int, int]:
    """(documents, words) of the committed corpus, read fresh."""
    from engine import Corpus
    c = Corpus.open(root)
    docs = c.connect().execute("SELECT count(*) FROM documents").fetchone()[0]
    words = next((l.rows for n, l in c.store.layers().items() if n == "word"), 0)
    return docs, words


def leftovers(root: Path) -> list[str]:
    from engine import Corpus
    listed = {p for (p,) in Corpus.open(root).store._rows("SELECT path FROM parts")}
    files = [str(f.relative_to(root)) for sub in ("layers", "edges") for f in (root / sub).glob("*/*.parquet")]
    return [f for f in files if f not in listed] + [str(p) for p in (root / "staging").glob("*")]


def base(work: Path, name: str) -> Path:
    root = work / name
    assert finish(strata("init", str(root)))[0] == 0
    assert finish(strata("import", str(root), str(GUM / "en_gum-ud-dev.conllu")))[0] == 0
    return root


def kill_checks(work: Path, times: int, rng: random.Random) -> list[str]:
    from engine.store import COMMIT_STEPS
    failures = []
    plans = [("random", rng.uniform(0.05, 1.6)) for _ in range(times)] + [(step, None) for step in COMMIT_STEPS]
    for k, (how, after) in enumerate(plans):
        root = base(work, f"kill{k}")
        before = state(root)
        env = {"STRATA_KILL_AT": how} if after is None else None
        proc = strata("import", str(root), str(GUM / "en_gum-ud-test.conllu"), "--prefix", "b", env=env)
        if after is not None:
            time.sleep(after)
            proc.send_signal(signal.SIGKILL)
        code, _, err = finish(proc)
        now = state(root)
        ok_state = now == before or now[0] > before[0]
        again = finish(strata("import", str(root), str(GUM / "en_gum-ud-test.conllu"), "--prefix", "c"))
        left = leftovers(root)
        good = ok_state and again[0] == 0 and not left
        print(f"kill {how}{'' if after is None else f' after {after:.2f} s'}: exit {code}, state "
              f"{'old' if now == before else 'new' if now[0] > before[0] else 'BROKEN'}, next import "
              f"{'ok' if again[0] == 0 else 'FAILED'}, leftovers {len(left)}")
        if not good:
            failures.append(f"kill {how}: state {now} vs {before}, next import {again[0]} {again[2][-200:]}, {left}")
    return failures


def race_checks(work: Path, pairs: int) -> tuple[list[str], dict[str, int]]:
    failures, outcomes = [], {"one refused": 0, "both ran": 0}
    for k in range(pairs):
        root = base(work, f"race{k}")
        a = strata("import", str(root), str(GUM / "en_gum-ud-test.conllu"), "--prefix", "a")
        b = strata("import", str(root), str(GUM / "en_gum-ud-test.conllu"), "--prefix", "b")
        (ca, _, ea), (cb, _, eb) = finish(a), finish(b)
        codes = sorted((ca, cb))
        refused = [e for c, e in ((ca, ea), (cb, eb)) if c == 2]
        if codes == [0, 2] and all("being written by process" in e and "Traceback" not in e for e in refused):
            outcomes["one refused"] += 1
        elif codes == [0, 0]:
            outcomes["both ran"] += 1
        else:
            failures.append(f"race {k}: exits {ca}, {cb}: {ea[-200:]} {eb[-200:]}")
        print(f"race {k}: exits {ca} and {cb}")
    return failures, outcomes


def reader_checks(work: Path, readers: int, imports: int) -> tuple[list[str], int]:
    root = base(work, "readers")
    states = {state(root)[1]}
    stop = work / "stop"
    loop = (f"import sys, pathlib\nfrom engine import Corpus\nroot, stop = sys.argv[1], pathlib.Path(sys.argv[2])\n"
            f"c = Corpus.open(root)\nwhile not stop.exists():\n"
            f"    print(c.query({COUNT!r}).rows()[0]['count'], flush=True)\n")
    procs = [subprocess.Popen([sys.executable, "-c", loop, str(root), str(stop)], cwd=REPO, stdout=subprocess.PIPE,
                              stderr=subprocess.PIPE, text=True) for _ in range(readers)]
    failures = []
    for k in range(imports):
        # new documents each time (ids made unique), so every commit is a new word count
        text = (GUM / "en_gum-ud-test.conllu").read_text(encoding="utf-8")
        copy = work / f"copy{k}.conllu"
        copy.write_text(text.replace("# newdoc id = ", f"# newdoc id = r{k}-").replace("# sent_id = ", f"# sent_id = r{k}-"),
                        encoding="utf-8")
        code, _, err = finish(strata("import", str(root), str(copy), "--wait", "60"))
        if code != 0:
            failures.append(f"import {k} during reads: exit {code} {err[-200:]}")
        states.add(state(root)[1])
    stop.touch()
    answers = 0
    for p in procs:
        out, err = p.communicate(timeout=120)
        got = [int(x) for x in out.split()]
        answers += len(got)
        if p.returncode != 0:
            failures.append(f"reader exit {p.returncode}: {err[-300:]}")
        bad = sorted(set(got) - states)
        if bad:
            failures.append(f"reader saw counts of no committed state: {bad[:5]} (states {sorted(states)})")
    print(f"readers: {readers} processes, {answers} answers during {imports} imports, {len(states)} states")
    return failures, answers


SLOW = "find a = word, b = word where not a precedes b allow cross product count"


def interrupt_checks(work: Path, times: int, rng: random.Random) -> tuple[list[str], list[float]]:
    """Ctrl-C (SIGINT) at random moments of a slow query: exit 130 within a second, one line."""
    root = base(work, "interrupts")
    failures, took = [], []
    for k in range(times):
        proc = strata("query", str(root), SLOW)
        time.sleep(rng.uniform(1.2, 3.0))
        if proc.poll() is not None:
            failures.append(f"interrupt {k}: the query ended before the signal")
            continue
        sent = time.monotonic()
        proc.send_signal(signal.SIGINT)
        code, out, err = finish(proc)
        took.append(time.monotonic() - sent)
        if code != 130 or "Traceback" in out + err or len(err.strip().splitlines()) != 1 or took[-1] >= 1.0:
            failures.append(f"interrupt {k}: exit {code} after {took[-1]:.2f} s: {err[-200:]}")
    if took:
        print(f"interrupts: {len(took)}, exit after the signal in {min(took):.2f}..{max(took):.2f} s")
    return failures, took


def fuzz_checks(work: Path, times: int, seed: int) -> tuple[list[str], dict[str, int]]:
    """``times`` fuzzed queries against the fuzzing corpus; a defect is any other outcome than a
    result or an error with its place."""
    from collections import Counter

    from hypothesis import HealthCheck, Phase, given, settings
    from hypothesis import seed as hypothesis_seed
    from hypothesis import strategies as st

    from benchmarks.query_fuzz import Vocabulary, any_query, fuzz_corpus, outcome
    (work / "fuzz").mkdir()
    corpus = fuzz_corpus(work / "fuzz", GUM / "en_gum-ud-dev.conllu")
    vocab = Vocabulary.of(corpus.store)
    counts: Counter = Counter()
    failures: list[str] = []
    started = time.monotonic()

    @hypothesis_seed(seed)
    @settings(max_examples=times, deadline=None, database=None, phases=[Phase.generate],
              suppress_health_check=list(HealthCheck))
    @given(st.data())
    def one(data) -> None:
        text = data.draw(any_query(vocab))
        got = outcome(corpus, text, timeout=3)
        counts[got.kind] += 1
        counts["limit"] += got.detail == "limit"
        if got.kind == "defect" and len(failures) < 50:
            failures.append(f"fuzz: {text!r}: {got.detail[-400:]}")
        done = sum(counts[k] for k in ("result", "clean error", "defect"))
        if done % 5000 == 0:
            print(f"fuzz: {done} queries, {counts['defect']} defects, {time.monotonic() - started:.0f} s", flush=True)
    one()
    print(f"fuzz: {sum(counts[k] for k in ('result', 'clean error', 'defect'))} queries: {counts['result']} results, "
          f"{counts['clean error']} clean errors ({counts['limit']} of them a time or memory limit), "
          f"{counts['defect']} defects; {time.monotonic() - started:.0f} s")
    return failures, dict(counts)


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--kill", type=int)
    ap.add_argument("--races", type=int)
    ap.add_argument("--readers", type=int)
    ap.add_argument("--imports", type=int)
    ap.add_argument("--interrupts", type=int)
    ap.add_argument("--fuzz", type=int, default=0)
    ap.add_argument("--seed", type=int, default=1)
    args = ap.parse_args(argv)
    if not GUM.exists():
        print(f"the treebank is not at {GUM}", file=sys.stderr)
        return 2
    others = ("kill", "races", "readers", "imports", "interrupts")
    only_fuzz = args.fuzz and all(getattr(args, k) is None for k in others)
    for key, default in zip(others, (20, 20, 4, 10, 20)):
        if getattr(args, key) is None:
            setattr(args, key, 0 if only_fuzz else default)
    if only_fuzz:
        with tempfile.TemporaryDirectory(prefix="strata-fuzz-") as tmp:
            failures, _ = fuzz_checks(Path(tmp), args.fuzz, args.seed)
        for f in failures:
            print("FAILED:", f)
        return 1 if failures else 0
    started = time.monotonic()
    with tempfile.TemporaryDirectory(prefix="strata-reliability-") as tmp:
        work = Path(tmp)
        failures = kill_checks(work, args.kill, random.Random(args.seed))
        race_failures, outcomes = race_checks(work, args.races)
        reader_failures, answers = reader_checks(work, args.readers, args.imports)
        interrupt_failures, took = interrupt_checks(work, args.interrupts, random.Random(args.seed))
        fuzz_failures = fuzz_checks(work, args.fuzz, args.seed)[0] if args.fuzz else []
    failures += race_failures + reader_failures + interrupt_failures + fuzz_failures
    print(f"summary: {args.kill} random kills + {len(__import__('engine.store').store.COMMIT_STEPS)} named steps, "
          f"{args.races} races ({outcomes['one refused']} one refused, {outcomes['both ran']} both ran), "
          f"{args.readers} readers x {args.imports} imports ({answers} answers), {args.interrupts} interrupts "
          f"(exit within {max(took, default=0):.2f} s); {len(failures)} failures; "
          f"{time.monotonic() - started:.0f} s")
    for f in failures:
        print("FAILED:", f)
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
