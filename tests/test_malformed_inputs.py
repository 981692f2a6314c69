"""A corpus of broken files, generated here, for every format strata imports: each is
refused with its file:line, exit code 2 and no traceback, and the corpus folder is the same,
byte for byte, before and after.

The valid files the breakages start from are cut from the open treebank (UD English GUM,
dev split, read in place from ../shared): its first document is the corpus, and the tier,
span, tree and transcript files are written from that document's own tokens (their times
are invented: only their shape matters here).  The rules each case breaks are those of the
standards the formats follow (CoNLL-U: "fields must not be empty", IDs and HEADs are numbers,
as the UD format page says, from memory; CSV: RFC 4180) and the README's "Input files".
"""
from __future__ import annotations

import csv
import hashlib
import io
from dataclasses import dataclass
from pathlib import Path

import pytest
from typer.testing import CliRunner

from engine.cli import app
from tests.conftest import first_gum_document, gum_file


@dataclass
class Case:
    name: str          # also the file's name, with its ending
    content: bytes
    line: int          # the line the message must name
    says: str          # a piece of the message
    options: tuple = ()


def snapshot(root: Path) -> dict[str, str]:
    """Every file and folder under the corpus, with a hash of each file's bytes."""
    out = {}
    for path in sorted(root.rglob("*")):
        rel = str(path.relative_to(root))
        out[rel] = hashlib.sha256(path.read_bytes()).hexdigest() if path.is_file() else "folder"
    return out


# -- the valid files --------------------------------------------------------------------
def conllu_base() -> list[str]:
    """The first three sentences of the dev split, under a document name of their own."""
    out, seen = [], 0
    with open(gum_file("dev"), encoding="utf-8") as f:
        for line in f:
            out.append(line.replace("GUM_academic_exposure", "other_doc"))
            if line == "\n":
                seen += 1
                if seen == 3:
                    break
    return out


def token_lines(lines: list[str]) -> list[int]:
    return [i for i, line in enumerate(lines) if line.strip() and not line.startswith("#")]


def tier_rows(doc: str, forms: list[str]) -> list[list[str]]:
    rows, t = [], 0.5
    for form in forms:
        rows.append([doc, "spoken", f"{t:.3f}", f"{t + 0.25:.3f}", form.lower()])
        t += 0.3
    return rows


def table(rows: list[list[str]], delim: str) -> list[str]:
    """Lines of a table: TSV joins at tabs; CSV quotes as RFC 4180 does (the ``csv`` module)."""
    if delim == "\t":
        return [delim.join(r) + "\n" for r in rows]
    out = io.StringIO()
    csv.writer(out, lineterminator="\n").writerows(rows)
    return out.getvalue().splitlines(keepends=True)


# -- the breakages ------------------------------------------------------------------------
def generic(stem: str, ending: str, lines: list[str], at: list[int], options: tuple = (),
            empty: str = "empty") -> list[Case]:
    """What breaks any text file: bad UTF-8 and NUL at several lines, and no content at all."""
    cases = [Case(f"{stem}-empty{ending}", b"", 1, empty, options),
             Case(f"{stem}-blank{ending}", b"\n  \n\n", 1, empty, options)]
    for i in at:
        raw = "".join(lines).encode("utf-8")
        start = len("".join(lines[:i]).encode("utf-8"))
        cases.append(Case(f"{stem}-utf8-{i + 1}{ending}", raw[:start + 1] + b"\xff" + raw[start + 1:], i + 1,
                          "invalid UTF-8", options))
        cases.append(Case(f"{stem}-nul-{i + 1}{ending}", raw[:start + 1] + b"\x00" + raw[start + 1:], i + 1,
                          "NUL character", options))
    return cases


def conllu_cases() -> list[Case]:
    base = conllu_base()
    toks = token_lines(base)
    cases = generic("c", ".conllu", base, [0, toks[0], toks[len(toks) // 2], toks[-1]])

    def change(name: str, i: int, col: int | None, value: str, says: str, line: int | None = None) -> None:
        lines = list(base)
        cols = lines[i].rstrip("\n").split("\t")
        if col is None:
            cols = cols[:9] if value == "drop" else cols + ["x"]
        else:
            cols[col] = value
        lines[i] = "\t".join(cols) + "\n"
        cases.append(Case(f"c-{name}.conllu", "".join(lines).encode("utf-8"), line or i + 1, says))

    fields = ["ID", "FORM", "LEMMA", "UPOS", "XPOS", "FEATS", "HEAD", "DEPREL", "DEPS", "MISC"]
    for col, field in enumerate(fields):                   # "Fields must not be empty"
        change(f"empty-{field.lower()}", toks[3], col, "", f"the {field} field is empty")
    for k, i in enumerate((toks[1], toks[-2])):
        change(f"nine-columns-{k}", i, None, "drop", "10 tab-separated columns")
        change(f"eleven-columns-{k}", i, None, "add", "10 tab-separated columns")
        change(f"id-letters-{k}", i, 0, "x7", "bad ID")
        change(f"id-huge-{k}", i, 0, str(2 ** 64), "20 digits")
        change(f"head-huge-{k}", i, 6, "1" * 25, "25 digits")
        change(f"head-letters-{k}", i, 6, "two", "is not a number")
        change(f"head-range-{k}", i, 6, "999", "out of range")
        change(f"id-range-bad-{k}", i, 0, "3-", "bad ID")
    for key, says in (("# newdoc id =", "'# newdoc id =' has no value"), ("# sent_id =", "'# sent_id =' has no value")):
        lines = list(base)
        i = next(k for k, line in enumerate(lines) if line.startswith(key))
        lines[i] = key + "\n"
        cases.append(Case(f"c-{key[2:].split()[0]}-empty.conllu", "".join(lines).encode("utf-8"), i + 1, says))
    lines = list(base)
    lines.insert(toks[2], "# note = inside\n")
    cases.append(Case("c-comment-inside.conllu", "".join(lines).encode("utf-8"), toks[2] + 1, "comment line inside"))
    lines = base + ["# sent_id = dangling\n"]
    cases.append(Case("c-comment-at-end.conllu", "".join(lines).encode("utf-8"), len(lines), "no token lines"))
    return cases


def table_cases(kind: str, doc: str, forms: list[str]) -> list[Case]:
    """Tier or span tables, in both endings."""
    cases = []
    for ending, delim in ((".tsv", "\t"), (".csv", ",")):
        stem = f"{kind[0]}{ending[1]}"
        if kind == "tiers":
            header = ["doc", "tier", "start", "end", "label"]
            rows = tier_rows(doc, forms)
            suffix, options = f".tiers{ending}", ()
            start_col = 2
        else:
            header = ["doc", "start", "end", "label"]
            rows = [[doc, str(5 * k), str(5 * k + 3), "x"] for k in range(12)]
            suffix, options = f".spans{ending}", ("--anchor", "chars", "--layer", "broken")
            start_col = 1
        lines = table([header] + rows, delim)
        cases += generic(stem, suffix, lines, [0, 1, 6, len(lines) - 1], options)

        def row_case(name: str, k: int, new: list[str] | None, says: str) -> None:
            changed = list(lines)
            changed[k] = table([new], delim)[0]
            cases.append(Case(f"{stem}-{name}{suffix}", "".join(changed).encode("utf-8"), k + 1, says, options))

        for k in (1, 7, len(lines) - 1):
            row = rows[k - 1]
            row_case(f"short-{k}", k, row[:-1], "fields, the header has")
            row_case(f"long-{k}", k, row + ["extra"], "fields, the header has")
            bad = list(row)
            bad[start_col] = "soon"
            row_case(f"start-word-{k}", k, bad, "not a")
            bad = list(row)
            bad[start_col] = "-1"
            row_case(f"start-negative-{k}", k, bad, "")
            bad = list(row)
            bad[0] = "nobody"
            row_case(f"doc-unknown-{k}", k, bad, "nobody")
        for name, new_header, says in (("no-start", [h for h in header if h != "start"], "lacks the column"),
                                       ("twice", header + ["label"], "appear twice"),
                                       ("reserved", header + ["pre"], "the store uses itself")):
            changed = table([new_header], delim) + lines[1:]
            cases.append(Case(f"{stem}-header-{name}{suffix}", "".join(changed).encode("utf-8"), 1, says, options))
        if delim == ",":
            changed = list(lines)
            changed[4] = changed[4].rstrip("\n") + ',"never closed\n'
            changed[0] = changed[0].rstrip("\n") + ",note\n"
            for j in range(1, len(changed)):
                if j != 4:
                    changed[j] = changed[j].rstrip("\n") + ",\n"
            cases.append(Case(f"{stem}-quote-open{suffix}", "".join(changed).encode("utf-8"), 5, "never closed",
                              options))
            changed = list(lines)
            changed[3] = changed[3].rstrip("\n").rsplit(",", 1)[0] + ',"x"y\n'
            cases.append(Case(f"{stem}-quote-after{suffix}", "".join(changed).encode("utf-8"), 4, "RFC 4180",
                              options))
    return cases


def tree_cases(doc: str, sentences: list[list[str]]) -> list[Case]:
    """Flat trees, one per sentence; the breakages are in the last one (line len(good))."""
    head = [f"# doc = {doc}\n"]
    leaves = [" ".join(f"(X {f.replace('(', '-LRB-').replace(')', '-RRB-')})" for f in forms) for forms in sentences]
    good = head + [f"(S {one})\n" for one in leaves]
    last = len(good)
    cases = generic("t", ".trees", good, [0, 1, last - 1], empty="no trees")
    cases.append(Case("t-unclosed.trees", "".join(good[:-1] + [f"(S {leaves[-1]}\n"]).encode("utf-8"), last,
                      "not closed"))
    cases.append(Case("t-extra-close.trees", "".join(good + [")\n"]).encode("utf-8"), last + 1, "no '(' to close"))
    cases.append(Case("t-empty-brackets.trees", "".join(good[:-1] + [f"(S () {leaves[-1]})\n"]).encode("utf-8"),
                      last, "empty brackets"))
    cases.append(Case("t-unknown-doc.trees", "".join(["# doc = nobody\n"] + good[1:]).encode("utf-8"), 2, "nobody"))
    return cases


def transcript_cases(doc: str, text: str) -> list[Case]:
    lines = [line + "\n" for line in text.split("\n")]
    cases = generic("x", ".txt", lines, [0, 2])
    changed = list(lines)
    changed[3] = "something else entirely\n"
    cases.append(Case("x-other-text.txt", "".join(changed).encode("utf-8"), 4, "different text", ("--doc", doc)))
    return [Case(c.name, c.content, c.line, c.says, c.options or ("--doc", doc)) for c in cases]


def first_tokens(corpus) -> tuple[list[str], list[list[str]]]:
    """The first 40 tokens' forms, and the whole sentences among them."""
    rows = corpus.connect().execute("SELECT sent, form FROM token ORDER BY ord LIMIT 40").fetchall()
    sentences: dict[int, list[str]] = {}
    for sent, form in rows:
        sentences.setdefault(sent, []).append(form)
    return [form for _, form in rows], list(sentences.values())[:-1]


@pytest.fixture(scope="module")
def corpus_and_cases(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("malformed")
    corpus, _ = first_gum_document(tmp)
    doc = corpus.store.documents()[0]
    forms, sentences = first_tokens(corpus)
    cases = (conllu_cases() + table_cases("tiers", doc.name, forms) + table_cases("spans", doc.name, forms)
             + tree_cases(doc.name, sentences) + transcript_cases(doc.name, doc.text))
    folder = tmp / "files"
    folder.mkdir()
    for case in cases:
        (folder / case.name).write_bytes(case.content)
    return corpus.path, folder, cases


def test_there_are_more_than_a_hundred_cases_in_every_format(corpus_and_cases):
    _, _, cases = corpus_and_cases
    endings = {c.name.split(".", 1)[1] for c in cases}
    assert len(cases) >= 100 and len({c.name for c in cases}) == len(cases)
    assert endings == {"conllu", "tiers.tsv", "tiers.csv", "spans.tsv", "spans.csv", "trees", "txt"}


def test_every_broken_file_is_refused_at_its_line(corpus_and_cases):
    root, folder, cases = corpus_and_cases
    runner = CliRunner()
    wrong = []
    for case in cases:
        before = snapshot(root)
        path = folder / case.name
        done = runner.invoke(app, ["import", str(root), str(path), *case.options])
        said = done.output.replace("\n", " ")
        if (done.exit_code != 2 or f"{path}:{case.line}:" not in done.output.replace("\n", "")
                or case.says not in said or "Traceback" in said or done.exception and
                not isinstance(done.exception, SystemExit)):
            wrong.append(f"{case.name} (line {case.line}, {case.says!r}): exit {done.exit_code}: {said[:300]}")
        if snapshot(root) != before:
            wrong.append(f"{case.name}: the corpus folder changed")
            break
    assert not wrong, "\n".join(wrong)


def _bom_files(doc: str, forms: list[str], sentences: list[list[str]], text: str
               ) -> list[tuple[str, bytes, tuple, str]]:
    """A valid file of every format: (name, content, import options, the layer it makes)."""
    trees = [f"# doc = {doc}\n"] + ["(S " + " ".join(f"(X {f.replace('(', '-LRB-').replace(')', '-RRB-')})"
                                                      for f in one) + ")\n" for one in sentences]
    spans = [[doc, str(5 * k), str(5 * k + 3), "x"] for k in range(12)]
    return [
        ("ok.conllu", "".join(conllu_base()).encode("utf-8"), ("--prefix", "other"), "other.word"),
        ("ok.tiers.tsv", "".join(table([["doc", "tier", "start", "end", "label"]] + tier_rows(doc, forms), "\t"))
         .encode("utf-8"), (), "spoken"),
        ("ok.spans.csv", "".join(table([["doc", "start", "end", "label"]] + spans, ",")).encode("utf-8"),
         ("--anchor", "chars", "--layer", "marks"), "marks"),
        ("ok.trees", "".join(trees).encode("utf-8"), (), "tree"),
        ("ok.txt", text.encode("utf-8"), ("--doc", "copy"), "documents"),
    ]


def test_a_byte_order_mark_is_skipped_by_every_reader(tmp_path):
    """The same file with and without a UTF-8 byte-order mark (EF BB BF) gives the same rows."""
    runner = CliRunner()
    got = {}
    for mark in (b"", b"\xef\xbb\xbf"):
        tmp = tmp_path / ("bom" if mark else "plain")
        tmp.mkdir()
        corpus, _ = first_gum_document(tmp)
        doc = corpus.store.documents()[0]
        forms, sentences = first_tokens(corpus)
        for name, content, options, layer in _bom_files(doc.name, forms, sentences, doc.text):
            path = tmp / name
            path.write_bytes(mark + content)
            done = runner.invoke(app, ["import", str(corpus.path), str(path), *options])
            assert done.exit_code == 0, done.output
            con = corpus.connect()
            order = "ORDER BY ALL" if layer != "documents" else "ORDER BY doc"
            got.setdefault(name, []).append(con.execute(f'SELECT * FROM "{layer}" {order}').fetchall())
    for name, (plain, marked) in got.items():
        assert plain == marked and plain, name
