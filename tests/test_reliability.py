"""The short version of the reliability harness (benchmarks/reliability.py) in CI: kills at
random moments and at each named step of a commit, races of two imports, readers during
imports; zero failures.  The long version's figures are in benchmarks/README.md."""
from __future__ import annotations

from benchmarks import reliability
from tests.conftest import gum_file


def test_the_short_reliability_run_has_no_failures(capsys):
    gum_file("dev")                     # skips with the reason where ../shared is absent
    assert reliability.main(["--kill", "2", "--races", "2", "--readers", "2", "--imports", "2",
                             "--interrupts", "2"]) == 0
    out = capsys.readouterr().out
    assert "0 failures" in out and out.count("kill ") >= 6 and "race 1" in out
