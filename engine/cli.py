"""The ``strata`` command. Thin: parses options, calls :class:`engine.Corpus`, prints.

Every user mistake (a :class:`StrataError`) is printed as a message with its place
and ends the command with exit code 2; there is no traceback for those.
"""
from __future__ import annotations

import os
import signal
import sys


def _interrupted_while_starting(signum, frame) -> None:   # pragma: no cover - timing
    """Ctrl-C before a command has begun: nothing was touched, so end at once, quietly."""
    sys.stderr.write("interrupted; the corpus is unchanged\n")
    sys.stderr.flush()
    os._exit(130)


# as a program (`strata`, `python -m engine.cli`), not when imported by other code: before the
# heavy imports below (typer, rich, and later DuckDB and pyarrow); each command puts Python's
# own handler back when it starts (user_errors), so its clean-up runs
if __name__ == "__main__" or os.path.basename(sys.argv[0]) == "strata":
    signal.signal(signal.SIGINT, _interrupted_while_starting)

import functools  # noqa: E402
import shutil  # noqa: E402
import tempfile  # noqa: E402
from pathlib import Path  # noqa: E402
from typing import Callable, List, Optional  # noqa: E402

import typer  # noqa: E402
from rich.console import Console  # noqa: E402
from rich.table import Table  # noqa: E402

from engine.errors import EXIT_USER_ERROR, StrataError  # noqa: E402

app = typer.Typer(add_completion=False, no_args_is_help=True, pretty_exceptions_enable=False,
                  help="strata: import annotation layers onto shared anchors and query across them.")
err = Console(stderr=True, highlight=False)
out = Console(highlight=False)


def user_errors(fn: Callable) -> Callable:
    """Turn StrataError into a message on stderr and exit code 2."""
    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        if signal.getsignal(signal.SIGINT) is _interrupted_while_starting:
            signal.signal(signal.SIGINT, signal.default_int_handler)
        try:
            return fn(*args, **kwargs)
        except StrataError as e:
            err.print(f"[bold red]error:[/] {_escape(str(e))}", soft_wrap=True)
            raise typer.Exit(EXIT_USER_ERROR)
        except KeyboardInterrupt:
            err.print("interrupted; the corpus is unchanged", soft_wrap=True)
            raise typer.Exit(130)
    return wrapper


def _escape(text: str) -> str:
    return text.replace("[", "\\[")


def _open(corpus: Path):
    from engine import Corpus
    return Corpus.open(corpus)


@app.command()
@user_errors
def init(corpus: Path = typer.Argument(..., help="folder to create the corpus in")) -> None:
    """Create an empty corpus."""
    from engine import Corpus
    Corpus.create(corpus)
    out.print(f"created corpus {corpus}")


@app.command("import")
@user_errors
def import_(
    corpus: Path = typer.Argument(..., help="the corpus folder"),
    files: List[Path] = typer.Argument(..., help="files to import"),
    format: Optional[str] = typer.Option(None, "--format", help="input format (default: from the file ending)"),
    prefix: str = typer.Option("", "--prefix", help="namespace for the new layers, for a second annotation"),
    lenient: bool = typer.Option(False, "--lenient", help="skip bad sentences or rows and list them"),
    doc: Optional[str] = typer.Option(None, "--doc", help="document name (transcripts)"),
    layer: Optional[str] = typer.Option(None, "--layer", help="layer name (span tables, trees)"),
    anchor: Optional[str] = typer.Option(None, "--anchor", help="span tables: chars | tokens:LAYER | time"),
    time_unit: str = typer.Option("s", "--time-unit", help="tiers and spans: s or ms"),
    words_tier: Optional[str] = typer.Option(None, "--words-tier",
                                             help="time tiers: the tier of the words, or '* - words' for one "
                                                  "per speaker (default: the tier whose labels match the text best)"),
    pauses_from: Optional[str] = typer.Option(None, "--pauses-from",
                                              help="TextGrid: the words tier's intervals with this label are the "
                                                   "pauses (default: its empty intervals)"),
    recording: Optional[str] = typer.Option(None, "--recording",
                                            help="the audio or video file of the one document these files are "
                                                 "about (several documents: a documents.tsv manifest)"),
    accept_poor_alignment: bool = typer.Option(False, "--accept-poor-alignment",
                                               help="keep a layer that aligns below the threshold"),
    wait: float = typer.Option(0.0, "--wait", help="seconds to wait while another process writes the corpus"),
) -> None:
    """Import annotation files into a corpus (all or nothing)."""
    extra = {k: v for k, v in {"doc": doc, "layer": layer, "anchor": anchor, "time_unit": time_unit,
                               "words_tier": words_tier, "pauses_from": pauses_from, "recording": recording,
                               "accept_poor_alignment": accept_poor_alignment}.items()
             if v not in (None, False, "s")}
    report = _open(corpus).import_files(files, format=format, prefix=prefix, lenient=lenient, wait=wait, **extra)
    counts = ", ".join(f"{v} {k}" for k, v in report.counts.items())
    out.print(f"imported {len(report.files)} file(s): {counts}")
    for note in report.notes:
        err.print(f"note: {_escape(note)}")
    for w in report.warnings:
        err.print(f"warning: {_escape(w)}")
    if report.skipped:
        err.print(f"skipped {len(report.skipped)} bad sentence(s) or row(s):")
        for s in report.skipped:
            err.print(f"  {_escape(s)}")


@app.command()
@user_errors
def info(corpus: Path = typer.Argument(..., help="the corpus folder")) -> None:
    """Documents, layers, node and edge counts, anchor coverage."""
    summary = _open(corpus).info()
    print_info(summary)


def print_info(summary: dict) -> None:
    out.print(f"corpus {summary['path']}: {summary['documents']} documents, {summary['characters']} characters")
    table = Table("layer", "kind", "rows", "attributes", "char anchors", "time anchors")
    for row in summary["layers"]:
        pct = lambda v: "" if v is None else f"{100 * v:.0f}%"
        table.add_row(row["layer"], row["kind"], str(row["rows"]), str(row["attrs"]),
                      pct(row.get("char_anchored")), pct(row.get("time_anchored")))
    out.print(table)


@app.command()
@user_errors
def export(
    corpus: Path = typer.Argument(..., help="the corpus folder"),
    format: str = typer.Option("conllu", "--format", help="output format"),
    output: Optional[Path] = typer.Option(None, "-o", "--output", help="file to write (default: stdout)"),
    prefix: str = typer.Option("", "--prefix", help="export the layers of this prefix"),
) -> None:
    """Write a corpus back out (CoNLL-U)."""
    from engine.output_files import check_writable
    if output is not None:
        check_writable(output, "export")
    c = _open(corpus)
    if output is None:
        sys.stdout.write(c.export(format, None, prefix))
    else:
        c.export(format, output, prefix)


@app.command()
@user_errors
def query(
    corpus: Path = typer.Argument(..., help="the corpus folder"),
    text: Optional[str] = typer.Argument(None, help="the query, or - to read it from stdin"),
    file: Optional[Path] = typer.Option(None, "-f", "--file", help="read the query from a file"),
    format: Optional[str] = typer.Option(None, "--format", help="table (the screen), csv, tsv, jsonl or "
                                         "parquet (default: from the ending of -o, else table)"),
    output: Optional[Path] = typer.Option(None, "-o", "--output", help="file for every hit: .csv, .tsv, "
                                          ".jsonl or .parquet"),
    limit: Optional[int] = typer.Option(None, "--limit", help="at most this many hits"),
    context: int = typer.Option(5, "--context", help="words of context left and right of each hit (surface "
                                "tokens: a contraction is one), inside the hit's sentence"),
    cross_sentences: bool = typer.Option(False, "--cross-sentences", help="let the context run on into the "
                                         "sentences before and after the hit's"),
    timeout: Optional[float] = typer.Option(None, "--timeout", help="stop the query after this many seconds"),
    memory: Optional[str] = typer.Option(None, "--memory", help="memory limit of the query, e.g. 2GB (default: "
                                         "half the machine's); beyond it DuckDB spills to .spill/ in the corpus"),
) -> None:
    """Run a query and print its hit table, or save every hit to a file."""
    from engine.output_files import check_writable, hit_format
    fmt = hit_format(output, format)
    if output is not None:
        check_writable(output, "hit table")
    elif fmt == "parquet":
        raise StrataError("parquet output needs a file: add -o FILE")
    q = _query_text(text, file)
    hits = _open(corpus).query(q, limit=limit, context=context, cross_sentences=cross_sentences,
                               timeout=timeout, memory=memory)
    write_hits(hits, fmt, output, limit)
    for note in hits.notes:
        err.print(f"note: {note}", markup=False)


def write_hits(hits, format: str, output: Optional[Path], limit: Optional[int] = None) -> None:
    """The screen table on stdout, or every hit in ``format`` to ``output`` (or stdout)."""
    writers = {"csv": hits.to_csv, "tsv": hits.to_tsv, "jsonl": hits.to_jsonl, "parquet": hits.to_parquet}
    if format == "table":
        # with --limit the screen lists every hit asked for; without, the first 50 and a count
        out.print(_escape(hits.render_table(width=out.width, max_rows=None if limit is not None else 50)),
                  soft_wrap=True)
        return
    if output is None:
        with tempfile.TemporaryDirectory() as tmp:
            path = writers[format](Path(tmp) / f"hits.{format}")
            with open(path, encoding="utf-8", newline="") as f:
                shutil.copyfileobj(f, sys.stdout)
    else:
        writers[format](output)


def _query_text(text: Optional[str], file: Optional[Path]) -> str:
    if file is not None:
        if text is not None:
            raise StrataError("give the query either as an argument or with -f FILE, not both")
        try:
            return Path(file).read_text(encoding="utf-8")
        except OSError as e:
            raise StrataError(f"cannot read the query file: {e.strerror}", file=str(file)) from None
        except UnicodeDecodeError:
            raise StrataError("the query file is not UTF-8", file=str(file)) from None
    if text is None or text == "-":
        return sys.stdin.read()
    return text


@app.command()
@user_errors
def migrate(corpus: Path = typer.Argument(..., help="the corpus folder")) -> None:
    """Bring a corpus made by an older strata to the current schema (all or nothing)."""
    from engine.migrate import migrate as run
    done = run(corpus)
    out.print(f"migrated {corpus}: " + ", ".join(f"{v} {k}" for k, v in done.items()))


@app.command()
@user_errors
def explain(
    corpus: Path = typer.Argument(..., help="the corpus folder"),
    text: Optional[str] = typer.Argument(None, help="the query, or - for stdin"),
    file: Optional[Path] = typer.Option(None, "-f", "--file", help="read the query from a file"),
) -> None:
    """Show how a query is parsed, compiled to SQL and planned by DuckDB."""
    out.print(_escape(_open(corpus).explain(_query_text(text, file))), soft_wrap=True)


@app.command("align-report")
@user_errors
def align_report(
    corpus: Path = typer.Argument(..., help="the corpus folder"),
    layer: Optional[str] = typer.Option(None, "--layer", help="only this layer"),
) -> None:
    """How each aligned layer's leaves landed on the text: counts per class, worst cases."""
    from engine.align.report import align_report as report
    for rep in report(_open(corpus).store, layer):
        out.print(_escape(rep.text()), soft_wrap=True)


@app.command()
@user_errors
def demo(
    corpus: Optional[Path] = typer.Option(None, "--corpus", help="where to build the demo corpus "
                                          "(default: a fresh temporary folder)"),
) -> None:
    """Build the invented demo corpus and run showcase queries on it."""
    from corpora_demo.run import run_demo
    run_demo(corpus, out)


@app.command()
@user_errors
def bench(
    tokens: List[str] = typer.Option(["1e5"], "--tokens", help="corpus size in tokens (1e5, 1000000); repeat it"),
    runs: int = typer.Option(5, "--runs", help="runs of each side per query; the median counts"),
    json_file: Optional[Path] = typer.Option(None, "--json", help="write one record per query and scale"),
    plot: Optional[Path] = typer.Option(None, "--plot", help="draw latency against corpus size (PNG)"),
    formats: str = typer.Option("conllu,brackets,tiers,spans", "--formats", help="layers to import"),
    cache: Optional[Path] = typer.Option(None, "--cache", help="folder for synthetic inputs and corpora "
                                         "(default $STRATA_BENCH_CACHE or ~/.cache/strata-bench)"),
    fresh: bool = typer.Option(False, "--fresh", help="import again even when a cached import matches"),
) -> None:
    """Time the query suite against hand SQL, a scan floor and pandas on synthetic corpora."""
    import importlib.util
    missing = [m for m in ("pandas", "conllu") + (("matplotlib",) if plot else ())
               if importlib.util.find_spec(m) is None]
    if missing:
        raise StrataError(f"the benchmark needs {', '.join(missing)}: install them with pip install -e '.[bench]'")
    from benchmarks.harness import BenchError, _formats, _tokens, run_bench
    from engine.output_files import check_writable
    for path, what in ((json_file, "benchmark record"), (plot, "plot")):
        if path is not None:
            check_writable(path, what)
    try:
        sizes = [n for t in tokens for n in _tokens(t)]
        fmts = _formats(formats)
    except Exception as e:   # argparse-style messages from the shared parsers
        raise BenchError(str(e)) from None
    raise typer.Exit(run_bench(sizes, runs, json_file, plot, fmts, work=cache, fresh=fresh))


def main() -> None:  # pragma: no cover - entry point
    app()


if __name__ == "__main__":  # pragma: no cover
    app()
