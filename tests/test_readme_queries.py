"""Every query the README shows in a code block reads without a syntax error: the README is
the language's first reference, and a renamed keyword must not leave it behind."""
from __future__ import annotations

import re
from pathlib import Path

import pytest

from querylang.parser import parse

README = Path(__file__).resolve().parents[1] / "README.md"


def readme_queries() -> list[str]:
    blocks = re.findall(r"```[a-z]*\n(.*?)```", README.read_text(encoding="utf-8"), flags=re.S)
    queries = []
    for block in blocks:
        for part in re.split(r"\n\s*\n", block):
            text = "\n".join(line.strip() for line in part.strip().splitlines())
            if text.startswith("find "):
                queries.append(text)
            elif text.startswith("strata query ") and "'find " in text:
                queries.append(text.split("'", 2)[1])
    return queries


def test_the_readme_has_queries():
    assert len(readme_queries()) >= 6


@pytest.mark.parametrize("text", readme_queries())
def test_a_readme_query_reads(text):
    parse(text)
