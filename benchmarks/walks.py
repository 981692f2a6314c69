"""Walk benchmark: the closure of an edge set by DuckDB recursive SQL against networkx.

Why: issue 3 leaves open whether unbounded walks (`a under b via enhanced`) run as recursive
SQL or in networkx, "whichever the benchmark shows to be faster".  The dev split of the open
treebank in ../shared/data/ud-english-gum/ (optionally replicated, each copy with its own
document and sentence ids) is imported into a temporary corpus; then, in one run, the same
closures are computed both ways and the pair sets must be identical:

* ``closure``: every pair (a, b), a != b, with b reachable from a along src -> dst of the
  ``enhanced`` set.  SQL: the recursive CTE the compiler writes (``SqlBuilder.closure``),
  fetched as numpy columns.  networkx: edges fetched from the same store, a ``DiGraph``, then
  ``nx.descendants`` per node, and ``nx.transitive_closure`` as a second networkx variant.
* ``depth 1..3``: the same with the shortest walk bounded (SQL CTE with a step counter;
  networkx ``single_source_shortest_path_length`` with a cutoff).
* ``candidates``: a query-shaped case, `find a = word(upos = "PRON"), b = word where a
  under b via enhanced count` end to end, against networkx descendants of the candidates only
  (compared by the count).

networkx times include reading the edges out of DuckDB and building the graph, because a
compiler using networkx would have to do both; SQL times include turning the result into
the same Python set of pairs.  The best of ``--runs`` counts.

    python -m benchmarks.walks [--copies 4] [--runs 3] [--json out.json]
"""
from __future__ import annotations

import argparse
import json
import sys
import tempfile
import time
from pathlib import Path
from typing import Callable

import networkx as nx

from benchmarks.import_bench import DEFAULT_DATA, BenchError, count_tokens, replicate
from engine import Corpus
from engine.execute import compile_query
from querylang.compiler import SqlBuilder
from querylang.sqltext import with_

DEV_FILE = "en_gum-ud-dev.conllu"
EDGE_SET = "enhanced"
CANDIDATES = 'find a = word(upos = "PRON"), b = word where a under b via enhanced count'
Pairs = set[tuple[int, int]]


def replicate_dev(data: Path, copies: int, out: Path) -> list[Path]:
    """``copies`` copies of the dev split with renamed documents and sentences (ids stay unique).

    The import benchmark's ``replicate`` copies every file of a folder, so it gets a folder
    holding only a link to the dev split.
    """
    src = data / DEV_FILE
    if not src.exists():
        raise BenchError(f"{src}: the treebank's dev split is expected there (read-only)")
    only_dev = out / "source"
    only_dev.mkdir()
    (only_dev / DEV_FILE).symlink_to(src.resolve())
    files, _ = replicate(only_dev, copies * count_tokens(src), out / "copies")
    return files


def best(runs: int, fn: Callable[[], object]) -> tuple[float, object]:
    """Best wall time of ``runs`` calls, and the last result."""
    times, out = [], None
    for _ in range(runs):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return min(times), out


def closure_sql(corpus: Corpus, depth: tuple[int, int] | None) -> tuple[str, list[object]]:
    """The compiler's own closure CTE for the edge set, selected on its own."""
    mod = "" if depth is None else f" at depth {depth[0]}..{depth[1]}"
    compiled = compile_query(f"find a = word, b = word where a under b via {EDGE_SET}{mod}", corpus.store)
    sb = SqlBuilder(compiled.state.checked, compiled.state.plan)
    name = sb.closure(EDGE_SET, compiled.state.checked.query.where, depth)
    return f'{with_(sb.walk_ctes, True)} SELECT "src", "dst" FROM {name}', sb.params


def pairs_of(columns: dict) -> Pairs:
    return set(zip(columns["src"].tolist(), columns["dst"].tolist()))


def graph(con) -> nx.DiGraph:
    e = con.execute(f'SELECT "src", "dst" FROM "{EDGE_SET}" WHERE "dst" IS NOT NULL').fetchnumpy()
    g = nx.DiGraph()
    g.add_edges_from(zip(e["src"].tolist(), e["dst"].tolist()))
    return g


def nx_descendants(con, depth: tuple[int, int] | None = None, sources: list[int] | None = None) -> Pairs:
    g = graph(con)
    out: Pairs = set()
    for a in (g if sources is None else (s for s in sources if s in g)):
        if depth is None:
            out.update((a, b) for b in nx.descendants(g, a))
        else:
            lengths = nx.single_source_shortest_path_length(g, a, cutoff=depth[1])
            out.update((a, b) for b, k in lengths.items() if b != a and k >= depth[0])
    return out


def nx_transitive(con) -> Pairs:
    tc = nx.transitive_closure(graph(con), reflexive=False)
    return {(a, b) for a, b in tc.edges if a != b}


def benchmark(copies: int, runs: int, data: Path = DEFAULT_DATA) -> dict:
    with tempfile.TemporaryDirectory(prefix="strata-walks-") as tmp:
        files = replicate_dev(data, copies, Path(tmp))
        corpus = Corpus.create(Path(tmp) / "corpus")
        corpus.import_files(files, progress=False)
        con = corpus.connect()
        n_edges = con.execute(f'SELECT count(*) FROM "{EDGE_SET}" WHERE "dst" IS NOT NULL').fetchone()[0]
        rows = []

        def case(name: str, sql_fn: Callable[[], Pairs | int], nx_fns: dict[str, Callable[[], Pairs | int]]) -> None:
            t_sql, got = best(runs, sql_fn)
            n = got if isinstance(got, int) else len(got)
            for label, fn in nx_fns.items():
                t_nx, want = best(runs, fn)
                if got != want:
                    m = want if isinstance(want, int) else len(want)
                    raise BenchError(f"{name}: SQL and {label} disagree ({n} vs {m} pairs)")
                rows.append({"case": name, "pairs": n, "sql_s": t_sql, "networkx": label, "nx_s": t_nx,
                             "nx_over_sql": t_nx / t_sql})

        for depth in (None, (1, 3)):
            sql, params = closure_sql(corpus, depth)
            case("closure" if depth is None else "depth 1..3",
                 lambda sql=sql, params=params: pairs_of(con.execute(sql, params).fetchnumpy()),
                 {"descendants": lambda depth=depth: nx_descendants(con, depth)}
                 | ({"transitive_closure": lambda: nx_transitive(con)} if depth is None else {}))
        pron = [r[0] for r in con.execute('SELECT "id" FROM "word" WHERE "upos" = \'PRON\'').fetchall()]
        words = {r[0] for r in con.execute('SELECT "id" FROM "word"').fetchall()}

        def candidates_sql() -> int:     # the whole query: parse, check, plan, SQL, count
            return corpus.query(CANDIDATES).rows()[0]["count"]

        def candidates_nx() -> int:
            return sum(1 for _, b in nx_descendants(con, None, pron) if b in words)
        case("candidates (PRON)", candidates_sql, {"descendants": candidates_nx})
        n_tokens = len(words)
    return {"copies": copies, "words": n_tokens, "edges": n_edges, "runs": runs, "rows": rows,
            "faster": "sql" if all(r["nx_over_sql"] > 1 for r in rows) else "mixed"}


def table(r: dict) -> str:
    lines = [f"walks over `{EDGE_SET}`: GUM dev x{r['copies']} = {r['words']:,} words, {r['edges']:,} edges, "
             f"best of {r['runs']}",
             f"{'case':<20} {'pairs':>9} {'SQL s':>8} {'networkx':<19} {'nx s':>8} {'nx/SQL':>7}"]
    for x in r["rows"]:
        lines.append(f"{x['case']:<20} {x['pairs']:>9,} {x['sql_s']:>8.3f} {x['networkx']:<19} {x['nx_s']:>8.3f} "
                     f"{x['nx_over_sql']:>6.1f}x")
    verdict = ("recursive SQL is faster in every case: the compiler keeps the walk in SQL" if r["faster"] == "sql"
               else "networkx is faster in some case: see the rows")
    lines.append(verdict)
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(prog="python -m benchmarks.walks", description=__doc__.split("\n\n")[0])
    ap.add_argument("--copies", type=int, default=1, help="copies of the dev split (default 1)")
    ap.add_argument("--runs", type=int, default=3, help="runs of each side; the best counts")
    ap.add_argument("--data", type=Path, default=DEFAULT_DATA, help="folder with the treebank's dev split")
    ap.add_argument("--json", type=Path, default=None, help="also write the result as JSON here")
    a = ap.parse_args(sys.argv[1:] if argv is None else argv)
    if a.copies < 1 or a.runs < 1:
        ap.error("--copies and --runs must be at least 1")
    try:
        r = benchmark(a.copies, a.runs, a.data)
    except BenchError as e:
        print(f"walk benchmark: {e}", file=sys.stderr)
        return 2
    print(table(r))
    if a.json:
        a.json.write_text(json.dumps(r, indent=1) + "\n", encoding="utf-8")
    return 0


if __name__ == "__main__":
    sys.exit(main())
