"""Ctrl-C, time and memory limits of a running query, with real processes and signals: a
query stops within a second of SIGINT with exit 130 and one line (no traceback); an import
interrupted leaves the corpus as it was; `--timeout` and `--memory` stop a query with exit 2
and say which limit it met.  The slow query is a cross product of the open treebank's words
(UD English GUM, dev split: about 790 million pairs)."""
from __future__ import annotations

import os
import random
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from engine import Corpus
from tests.conftest import gum_file

REPO = Path(__file__).resolve().parents[1]
SLOW = "find a = word, b = word where not a precedes b allow cross product count"


def start(*args: str) -> subprocess.Popen:
    return subprocess.Popen([sys.executable, "-m", "engine.cli", *args], cwd=REPO, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)


def run(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "engine.cli", *args], cwd=REPO, capture_output=True, text=True,
                          timeout=300)


@pytest.fixture(scope="module")
def corpus(tmp_path_factory) -> Path:
    root = tmp_path_factory.mktemp("limits") / "c"
    assert run("init", str(root)).returncode == 0
    assert run("import", str(root), str(gum_file("dev"))).returncode == 0
    return root


def interrupt_after(proc: subprocess.Popen, seconds: float) -> float:
    """Send SIGINT after ``seconds``; returns how long the process took to end after it."""
    time.sleep(seconds)
    assert proc.poll() is None, proc.communicate()
    sent = time.monotonic()
    proc.send_signal(signal.SIGINT)
    proc.wait(timeout=30)
    return time.monotonic() - sent


@pytest.mark.parametrize("seed", range(5))
def test_ctrl_c_stops_a_running_query_within_a_second(corpus, seed):
    proc = start("query", str(corpus), SLOW)
    took = interrupt_after(proc, random.Random(seed).uniform(1.5, 3.0))   # after start-up, mid-query
    out, err = proc.communicate()
    assert proc.returncode == 130
    assert took < 1.0, took
    assert err.strip().splitlines() == ["interrupted; the corpus is unchanged"]
    assert "Traceback" not in out + err


def _paused_import(root: Path, step: str, prefix: str) -> subprocess.Popen:
    """An import of the test split held at the commit step ``step`` (STRATA_PAUSE_AT)."""
    env = {**os.environ, "STRATA_PAUSE_AT": step, "STRATA_PAUSE_SECONDS": "3"}
    proc = subprocess.Popen([sys.executable, "-m", "engine.cli", "import", str(root), str(gum_file("test")),
                             "--prefix", prefix], cwd=REPO, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            text=True, env=env)
    seen = []
    for line in proc.stderr:                     # wait until it says where it is held
        seen.append(line)
        if line.strip() == f"paused at {step}":
            return proc
    pytest.fail(f"the import never reached {step}: {''.join(seen)}")


@pytest.fixture()
def imported(tmp_path) -> Path:
    root = tmp_path / "c"
    assert run("init", str(root)).returncode == 0
    assert run("import", str(root), str(gum_file("dev"))).returncode == 0
    return root


def test_ctrl_c_before_the_commit_leaves_the_corpus_as_it_was(imported):
    before = Corpus.open(imported).info()
    proc = _paused_import(imported, "staged", "b")
    proc.send_signal(signal.SIGINT)
    out, err = proc.communicate(timeout=60)
    assert proc.returncode == 130 and "Traceback" not in err
    assert "interrupted; the corpus is unchanged" in err
    assert Corpus.open(imported).info() == before
    assert not list((imported / "staging").glob("*"))
    assert run("import", str(imported), str(gum_file("test")), "--prefix", "c").returncode == 0


def test_ctrl_c_inside_the_commit_is_held_until_the_import_is_whole(imported):
    """Between the moves and the catalog a Ctrl-C is held: the import completes and every part
    the catalog lists is on disk (before, a Ctrl-C just after the catalog's COMMIT deleted
    parts the catalog already listed)."""
    before = Corpus.open(imported).info()
    proc = _paused_import(imported, "before-catalog", "b")
    proc.send_signal(signal.SIGINT)
    out, err = proc.communicate(timeout=60)
    assert proc.returncode == 0 and "Traceback" not in err, err
    after = Corpus.open(imported).info()
    assert after["documents"] == before["documents"] + 30          # the test split's 30 documents
    done = run("query", str(imported), "find t = b.token count")     # reads every new part
    assert done.returncode == 0 and "Traceback" not in done.stderr
    assert "27986" in done.stdout.replace(",", ""), done.stdout   # GUM test tokens, as published


@pytest.mark.parametrize("seed", range(2))
def test_ctrl_c_at_a_random_moment_of_an_import_is_all_or_nothing(imported, seed):
    before = Corpus.open(imported).info()
    proc = start("import", str(imported), str(gum_file("test")), "--prefix", "b")
    time.sleep(random.Random(seed).uniform(0.2, 1.0))
    proc.send_signal(signal.SIGINT)
    out, err = proc.communicate(timeout=60)
    after = Corpus.open(imported).info()
    assert "Traceback" not in err
    if proc.returncode == 0:              # it had finished: then it is all there
        assert after["documents"] == before["documents"] + 30
    else:
        assert proc.returncode == 130
        assert after == before
        assert not list((imported / "staging").glob("*"))


def test_a_time_limit_stops_the_query_with_exit_2(corpus):
    started = time.monotonic()
    done = run("query", str(corpus), SLOW, "--timeout", "1")
    assert done.returncode == 2 and "time limit of 1 s" in done.stderr and "--timeout" in done.stderr
    assert time.monotonic() - started < 20


def test_a_memory_limit_stops_the_query_with_exit_2(corpus, tmp_path):
    done = run("query", str(corpus), "find a = word, b = word where a.lemma = b.lemma show a.form",
               "--memory", "20MB", "-o", str(tmp_path / "all.csv"))
    assert done.returncode == 2 and "more memory than its limit" in done.stderr and "--memory" in done.stderr
    assert "Traceback" not in done.stderr


@pytest.mark.parametrize("option, value, says", [("--memory", "lots", "not a size"), ("--timeout", "0", "not a time")])
def test_a_limit_that_is_not_one_is_refused(corpus, option, value, says):
    done = run("query", str(corpus), "find t = word count", option, value)
    assert done.returncode == 2 and says in done.stderr
