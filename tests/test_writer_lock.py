"""One writer and many readers, with real processes (not threads): a second writer is refused
at once naming the first, opening or reading a corpus never disturbs a running import, a
killed writer leaves the old state and its lock and leftovers go to the next writer, and a
long-lived reader follows the corpus from one committed state to the next.

The imports read the open treebank (UD English GUM) in place; the demo's invented files give
a second import that rewrites stored layers (a time tier over the CoNLL-U words).
"""
from __future__ import annotations

import json
import os
import random
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from corpora_demo.run import DATA
from engine import Corpus
from engine.lock import LOCK_FILE, owner_of
from tests.conftest import gum_file

REPO = Path(__file__).resolve().parents[1]


def strata(*args: str) -> subprocess.Popen:
    return subprocess.Popen([sys.executable, "-m", "engine.cli", *args], cwd=REPO, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)


def run(*args: str, timeout: float = 120) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "engine.cli", *args], cwd=REPO, capture_output=True, text=True,
                          timeout=timeout)


def wait_for_owner(root: Path, proc: subprocess.Popen, seconds: float = 30) -> dict:
    """The lock file's owner once the writer has taken the lock."""
    end = time.monotonic() + seconds
    while time.monotonic() < end:
        owner = owner_of(root)
        if owner and owner.get("pid") == proc.pid:
            return owner
        assert proc.poll() is None, proc.communicate()
        time.sleep(0.01)
    raise AssertionError("the writer never took the lock")


@pytest.fixture(scope="module")
def slow(tmp_path_factory) -> Path:
    """A CoNLL-U file four times the treebank's two splits (ids made unique), so that an import
    of it lasts long enough for a second process to meet it."""
    out = tmp_path_factory.mktemp("slow") / "four.conllu"
    parts = []
    for copy in range(2):
        for split in ("dev", "test"):
            text = gum_file(split).read_text(encoding="utf-8")
            text = text.replace("# newdoc id = ", f"# newdoc id = c{copy}-").replace("# sent_id = ", f"# sent_id = c{copy}-")
            parts.append(text.rstrip("\n") + "\n\n")
    out.write_text("".join(parts), encoding="utf-8")
    return out


def fresh(tmp_path: Path, name: str = "c") -> Path:
    root = tmp_path / name
    assert run("init", str(root)).returncode == 0
    return root


def state(root: Path) -> tuple[int, int]:
    """(documents, word rows) of the committed corpus, read by a new process's view of it."""
    c = Corpus.open(root)
    info = c.info()
    words = next((l["rows"] for l in info["layers"] if l["layer"] == "word"), 0)
    return info["documents"], words


def leftovers(root: Path) -> list[str]:
    """Staging folders and Parquet files on disk that the catalog does not list."""
    listed = {p for (p,) in Corpus.open(root).store._rows("SELECT path FROM parts")}
    files = [str(f.relative_to(root)) for sub in ("layers", "edges") for f in (root / sub).glob("*/*.parquet")]
    return [f for f in files if f not in listed] + [str(p) for p in (root / "staging").glob("*")]


def test_a_second_writer_is_refused_at_once_naming_the_first(tmp_path, slow):
    dev, test = slow, gum_file("test")
    for k in range(3):
        root = fresh(tmp_path, f"c{k}")
        first = strata("import", str(root), str(dev))
        owner = wait_for_owner(root, first)
        started = time.monotonic()
        second = run("import", str(root), str(test), "--prefix", "b")
        assert time.monotonic() - started < 10
        assert second.returncode == 2, second.stderr
        assert f"the corpus is being written by process {first.pid} since {owner['since']}" in second.stderr
        assert "Traceback" not in second.stderr
        out, err = first.communicate(timeout=120)
        assert first.returncode == 0, err
        assert state(root)[0] == sum(1 for l in dev.read_text().splitlines() if l.startswith("# newdoc"))


def test_wait_lets_the_second_writer_follow(tmp_path):
    root = fresh(tmp_path)
    first = strata("import", str(root), str(gum_file("dev")))
    wait_for_owner(root, first)
    second = run("import", str(root), str(gum_file("test")), "--wait", "120")
    assert first.wait(timeout=120) == 0
    assert second.returncode == 0, second.stderr
    docs = sum(1 for split in ("dev", "test") for l in gum_file(split).read_text().splitlines()
               if l.startswith("# newdoc"))
    assert state(root)[0] == docs


def test_opening_and_reading_during_an_import_never_disturb_it(tmp_path, slow):
    root = fresh(tmp_path)
    assert run("import", str(root), str(gum_file("dev"))).returncode == 0
    before = state(root)
    writer = strata("import", str(root), str(slow))
    wait_for_owner(root, writer)
    readers = []
    while writer.poll() is None:
        readers.append(run("query", str(root), "find t = word count"))
        readers.append(run("info", str(root)))
        Corpus.open(root)                                    # opening in this process too
    out, err = writer.communicate()
    assert writer.returncode == 0, err
    after = state(root)
    assert readers and all(r.returncode == 0 for r in readers), [r.stderr for r in readers if r.returncode]
    counts = {int(r.stdout.split()[-3]) for r in readers if "count" in r.stdout}
    assert counts <= {before[1], after[1]}                  # every answer is one committed state
    assert leftovers(root) == []


@pytest.mark.parametrize("moment", [0.2, 1.0, 2.5, 4.0])
def test_a_killed_writer_leaves_the_old_state_and_the_next_writer_takes_over(tmp_path, moment, slow):
    root = fresh(tmp_path)
    assert run("import", str(root), str(gum_file("dev"))).returncode == 0
    before = state(root)
    writer = strata("import", str(root), str(slow), "--prefix", "b")
    wait_for_owner(root, writer)
    time.sleep(moment * random.Random(moment).uniform(0.8, 1.2))
    writer.send_signal(signal.SIGKILL)
    writer.wait()
    killed_state = state(root)
    assert killed_state == before or killed_state[0] > before[0]      # the old state or the new one
    again = run("import", str(root), str(DATA / "calls.conllu"))     # the lock of the dead is taken over
    assert again.returncode == 0, again.stderr
    assert leftovers(root) == []


def test_unlisted_parts_are_removed_by_the_next_writer(tmp_path):
    root = fresh(tmp_path)
    assert run("import", str(root), str(gum_file("dev"))).returncode == 0
    stray = root / "layers" / "word" / "00000000-dead.parquet"
    stray.write_bytes((next((root / "layers" / "word").glob("*.parquet"))).read_bytes())
    (root / "staging" / "dead").mkdir(parents=True)
    assert Corpus.open(root).query("find t = word count").rows()    # opening and reading keep them
    assert stray.exists() and (root / "staging").exists()
    assert run("import", str(root), str(DATA / "calls.conllu")).returncode == 0
    assert not stray.exists() and leftovers(root) == []


def test_a_long_lived_corpus_follows_another_process_that_rewrites_its_layers(tmp_path):
    root = fresh(tmp_path)
    assert run("import", str(root), str(DATA / "calls.conllu")).returncode == 0
    reader = Corpus.open(root)
    untimed = reader.query("find w = word count").rows()[0]["count"]
    con = reader.connect()                                  # a connection of the first state
    first_parts = sorted((root / "layers" / "word").glob("*.parquet"))
    # the time tier gives the stored words times: their parts are rewritten
    done = run("import", str(root), str(DATA / "calls.tiers.tsv"))
    assert done.returncode == 0, done.stderr
    assert sorted((root / "layers" / "word").glob("*.parquet")) != first_parts
    assert con.execute('SELECT count(*) FROM "word"').fetchone()[0] == untimed     # still readable
    timed = reader.query("find w = word where w.start is not missing count").rows()[0]["count"]
    assert timed > 0                                        # the new state, on the next query
    assert run("import", str(root), str(DATA / "calls.spans.tsv"), "--layer", "disfluency").returncode == 0
    assert all(not p.exists() for p in first_parts)         # the next writer removed what was retired
    assert leftovers(root) == []
    assert reader.query("find w = word count").rows()[0]["count"] == untimed


def test_the_lock_file_names_its_owner_only_while_held(tmp_path):
    root = fresh(tmp_path)
    assert run("import", str(root), str(DATA / "calls.conllu")).returncode == 0
    assert owner_of(root) is None and (root / LOCK_FILE).exists()
    writer = strata("import", str(root), str(gum_file("dev")))
    owner = wait_for_owner(root, writer)
    assert owner["pid"] == writer.pid and owner["started"] == Path(f"/proc/{writer.pid}/stat").read_text() \
        .rsplit(")", 1)[1].split()[19]
    assert writer.wait(timeout=120) == 0
    assert json.loads((root / LOCK_FILE).read_text() or "null") is None
    assert os.getpid() != owner["pid"]
