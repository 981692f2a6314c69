"""`.ci/run` removes the virtual environment it makes, whatever the outcome.

Run with a stand-in `python3` first on the PATH that makes the venv folder and then fails, and
with TMPDIR pointing at an empty folder: after the run that folder must be empty again.
"""
from __future__ import annotations

import os
import subprocess
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]


def test_ci_run_cleans_up_after_a_failure(tmp_path):
    fake_bin = tmp_path / "bin"
    fake_bin.mkdir()
    python3 = fake_bin / "python3"
    # `python3 -m venv DIR`: make DIR with a file in it, then fail as a broken install would
    python3.write_text('#!/bin/sh\nmkdir -p "$3" && echo x > "$3/marker" && exit 3\n', encoding="utf-8")
    python3.chmod(0o755)
    scratch = tmp_path / "tmp"
    scratch.mkdir()
    env = {**os.environ, "PATH": f"{fake_bin}{os.pathsep}{os.environ['PATH']}", "TMPDIR": str(scratch)}
    done = subprocess.run(["bash", str(REPO / ".ci" / "run")], env=env, capture_output=True, text=True, timeout=60)
    assert done.returncode == 3, done.stderr
    assert list(scratch.iterdir()) == []
