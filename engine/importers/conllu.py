"""CoNLL-U in: all ten columns, multiword tokens, empty nodes, comments, entities.

CoNLL-U is the open file standard of Universal Dependencies
(https://universaldependencies.org/format.html).

The import is vectorised rather than a loop over lines: DuckDB reads the file, splits
the columns, groups lines into sentences and documents, checks IDs and heads,
rebuilds each document's text and every node's offsets with window functions, and
pairs the entity brackets; numpy numbers the dependency trees (:mod:`engine.importers.treeorder`).
Python touches one value per document, never one per token, which is what makes a
million-token import take seconds. DuckDB spills to the staging folder past its
memory limit, so memory stays bounded.

Layers written (see DEVELOPERS.md): ``token`` (syntactic words, with the dependency
tree as tree columns), ``word`` (surface tokens: a multiword token once), ``empty``
(empty nodes), ``sentence``, ``mention``; edge sets ``dep`` and ``enhanced``. The
primary text of a document is its surface tokens, each followed by a space unless
``SpaceAfter=No``, with sentences joined by a newline.
"""
from __future__ import annotations

import json
from pathlib import Path

import duckdb
import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pa_csv

from engine.errors import StrataError
from engine.importers.base import ImportOptions, ImportReport, sha256_of
from engine.importers.treeorder import TreeError, tree_order
from engine.progress import step_progress
from engine.store import ANCHOR_COLUMNS, EDGE_COLUMNS, Batch

FORMAT = "conllu"
DEFAULT_ENTITY_FIELDS = "eid-etype-head-other"
MEMORY_LIMIT = "6GB"
_ITEM_RE = r"\(([^()]+)\)|\(([^()]+)|([^()]+)\)"
_STEPS = 8


def _q(v: str) -> str:
    """A SQL string literal (for values the importer itself chose, never for data)."""
    return "'" + v.replace("'", "''") + "'"


def _ident(v: str) -> str:
    return '"' + v.replace('"', '""') + '"'


class ConlluImporter:
    """Imports CoNLL-U files into one batch; ids, ordinals and bases continue across files."""

    def __init__(self, batch: Batch, options: ImportOptions) -> None:
        self.batch = batch
        self.opt = options
        self.report = ImportReport()
        L = options.layer
        self.names = {k: L(k) for k in ("token", "word", "empty", "sentence", "mention", "dep", "enhanced")}
        self.con = duckdb.connect()
        self.con.execute("SET python_enable_replacements = false")
        self.con.execute("SET enable_progress_bar = false")
        self.con.execute(f"SET memory_limit = {_q(MEMORY_LIMIT)}")
        self.con.execute(f"SET temp_directory = {_q(str(batch.stage / 'spill'))}")
        self.tok_ord = self._scalar_from_layer(self.names["token"], "coalesce(max(ord) + 1, 0)", 0)
        self.word_ord = self._scalar_from_layer(self.names["word"], "coalesce(max(ord) + 1, 0)", 0)
        self.order = int(batch.store.meta("next_order") or 0)
        self._seen_sentence_ids()
        self._docs_with_tokens = set(self._column_from_layer(self.names["token"], "DISTINCT doc"))
        self.known_docs = {d.name: d for d in batch.store.documents()}
        self.n_file = 0
        self._declare()

    # -- set-up ------------------------------------------------------------------
    def _layer_files(self, layer: str) -> list[str]:
        return [str(p) for p in self.batch.store.part_paths(layer)]

    def _scalar_from_layer(self, layer: str, expr: str, default):
        files = self._layer_files(layer)
        if not files:
            return default
        return self.con.execute(f"SELECT {expr} FROM read_parquet(?, union_by_name = true)", [files]).fetchone()[0]

    def _column_from_layer(self, layer: str, expr: str) -> list:
        files = self._layer_files(layer)
        if not files:
            return []
        return [r[0] for r in self.con.execute(f"SELECT {expr} FROM read_parquet(?, union_by_name = true)",
                                               [files]).fetchall()]

    def _seen_sentence_ids(self) -> None:
        self.con.execute("CREATE TABLE seen_ids (sent_id VARCHAR, src VARCHAR)")
        files = self._layer_files(self.names["sentence"])
        if files:
            self.con.execute("INSERT INTO seen_ids SELECT sent_id, 'the corpus' FROM "
                             "read_parquet(?, union_by_name = true) WHERE sent_id IS NOT NULL", [files])

    def _declare(self) -> None:
        n = self.names
        common = {"token_layer": n["token"], "word_layer": n["word"], "format": FORMAT}
        self.batch.declare_layer(n["token"], "token", {**common, "tree": True, "edge_sets": [n["dep"], n["enhanced"]]})
        self.batch.declare_layer(n["word"], "token", common)
        self.batch.declare_layer(n["empty"], "token", common)
        self.batch.declare_layer(n["sentence"], "span", common)
        self.batch.declare_layer(n["mention"], "span", {**common, "coreference": True})
        self.batch.declare_layer(n["dep"], "edges", {"nodes": n["token"]})
        self.batch.declare_layer(n["enhanced"], "edges", {"nodes": n["token"]})

    # -- one file ------------------------------------------------------------------
    def import_file(self, path: Path) -> None:
        self.path = path
        self.n_file += 1
        self.report.files.append(str(path))
        self.batch.add_source(str(path), sha256_of(path))
        big = path.stat().st_size >= (4 << 20)
        with step_progress(_STEPS, f"import {path.name}", self.opt.progress and big) as step:
            self._read_lines(path); step()
            self._structure(); step()
            self._check_new_layers()
            bad = self._validate(); step()
            self._drop_sentences(bad); step()
            self._documents(); step()
            self._offsets(); step()
            self._trees(); step()
            self._mentions(); step()
            self._write()
        self.report.add("documents", self.n_docs)

    def _read_lines(self, path: Path) -> None:
        """All lines with their number, kind (0 blank, 1 comment, 2 token), sentence and document counters.

        pyarrow's CSV reader (multi-threaded, one column, no quoting) splits the lines and
        checks UTF-8; the counters are numpy cumulative sums.
        """
        try:
            table = pa_csv.read_csv(
                path, read_options=pa_csv.ReadOptions(column_names=["line"], block_size=1 << 24),
                parse_options=pa_csv.ParseOptions(delimiter="\x01", quote_char=False, escape_char=False,
                                                  ignore_empty_lines=False, newlines_in_values=False),
                convert_options=pa_csv.ConvertOptions(column_types={"line": pa.string()}, strings_can_be_null=False,
                                                      quoted_strings_can_be_null=False))
        except pa.ArrowInvalid as e:
            if "UTF8" in str(e) or "utf8" in str(e).lower() or "utf-8" in str(e).lower():
                _raise_bad_utf8(path)
            raise StrataError(f"cannot read: {e}", file=str(path)) from None
        except OSError as e:
            raise StrataError(f"cannot read: {e}", file=str(path)) from None
        line = table.column("line")
        if table.num_rows and pc.any(pc.ends_with(line, "\r")).as_py():
            line = pc.utf8_rtrim(line, characters="\r")
        blank = pc.equal(line, "").to_numpy(zero_copy_only=False)
        comment = pc.starts_with(line, "#").to_numpy(zero_copy_only=False)
        newdoc = pc.starts_with(line, "# newdoc").to_numpy(zero_copy_only=False)
        kind = np.where(blank, 0, np.where(comment, 1, 2)).astype(np.int8)
        lines = pa.table({"n": pa.array(np.arange(1, table.num_rows + 1, dtype=np.int64)), "line": line,
                          "k": pa.array(kind), "s": pa.array(np.cumsum(blank, dtype=np.int64)),
                          "d": pa.array(np.cumsum(newdoc, dtype=np.int64))})
        self.con.register("lines_arrow", lines)
        self.con.execute("CREATE OR REPLACE TABLE lines AS SELECT * FROM lines_arrow")
        self.con.unregister("lines_arrow")

    def _structure(self) -> None:
        """Token rows split into the ten columns; comments parsed into key/value."""
        con = self.con
        con.execute("""
            CREATE OR REPLACE TABLE rows AS
            SELECT n, s, string_split(line, chr(9)) AS f FROM lines WHERE k = 2""")
        con.execute("""
            CREATE OR REPLACE TABLE tok AS
            SELECT n, s, len(f) AS nf, f[1] AS cid, f[2] AS form, f[3] AS lemma, f[4] AS upos, f[5] AS xpos,
                   f[6] AS feats, f[7] AS head, f[8] AS deprel, f[9] AS deps, f[10] AS misc,
                   CASE WHEN regexp_full_match(f[1], '[0-9]+') THEN 'w'
                        WHEN regexp_full_match(f[1], '[0-9]+-[0-9]+') THEN 'm'
                        WHEN regexp_full_match(f[1], '[0-9]+\\.[0-9]+') THEN 'e' ELSE '?' END AS kind
            FROM rows""")
        con.execute("DROP TABLE rows")
        con.execute("""
            CREATE OR REPLACE TABLE com AS
            SELECT n, s, line,
                   trim(CASE WHEN contains(line, ' = ') THEN split_part(substr(line, 2), ' = ', 1)
                             ELSE split_part(substr(line, 2), '=', 1) END) AS key,
                   trim(CASE WHEN contains(line, ' = ') THEN substr(line, strpos(line, ' = ') + 3)
                             WHEN contains(line, '=') THEN substr(line, strpos(line, '=') + 1) ELSE '' END) AS value
            FROM lines WHERE k = 1""")
        con.execute("""
            CREATE OR REPLACE TABLE sent AS
            SELECT s, min(n) AS first_line, max(d) AS d,
                   bool_or(k = 2) AS has_rows, min(n) FILTER (WHERE k = 2) AS first_row,
                   max(n) FILTER (WHERE k = 1) AS last_comment
            FROM lines WHERE k > 0 GROUP BY s""")
        # word position (1-based) among the words of its sentence, and the word count
        con.execute("""
            CREATE OR REPLACE TABLE tok2 AS
            SELECT t.*, count(*) FILTER (WHERE kind = 'w') OVER (PARTITION BY s ORDER BY n
                        ROWS UNBOUNDED PRECEDING) AS wpos,
                   count(*) FILTER (WHERE kind = 'w') OVER (PARTITION BY s) AS nwords
            FROM tok t""")
        con.execute("DROP TABLE tok")
        con.execute("ALTER TABLE tok2 RENAME TO tok")

    def _check_new_layers(self) -> None:
        """A document that already has these layers needs --prefix: say so before anything else."""
        if not self._docs_with_tokens:
            return
        names = self.con.execute("SELECT value, n FROM com WHERE key = 'newdoc id' ORDER BY n").fetchall()
        if not names:
            names = [(self.path.stem, 1)]
        for name, line in names:
            existing = self.known_docs.get(name)
            if existing is not None and existing.doc in self._docs_with_tokens:
                raise StrataError(f"document {name!r} already has a {self.names['token']!r} layer; "
                                  "import a second annotation of it with --prefix NAME", file=str(self.path), line=line)

    # -- validation: every check is one query; the first failing line is reported -----
    def _checks(self) -> list[str]:
        hd = "TRY_CAST(head AS INTEGER)"
        return [
            f"SELECT n, s, 'a token line needs 10 tab-separated columns, this one has ' || nf FROM tok WHERE nf <> 10",
            "SELECT n, s, 'bad ID ' || cid || ': expected a number, a range like 3-4 or an empty node like 3.1' "
            "FROM tok WHERE kind = '?' AND nf = 10",
            "SELECT n, s, 'word ID ' || cid || ' out of order: expected ' || wpos FROM tok "
            "WHERE kind = 'w' AND nf = 10 AND CAST(cid AS BIGINT) <> wpos",
            "SELECT n, s, 'multiword token range ' || cid || ' must start at the next word (' || (wpos + 1) || "
            "') and span at least two words' FROM tok WHERE kind = 'm' AND nf = 10 AND "
            "(CAST(split_part(cid, '-', 1) AS BIGINT) <> wpos + 1 OR "
            "CAST(split_part(cid, '-', 2) AS BIGINT) <= CAST(split_part(cid, '-', 1) AS BIGINT))",
            "SELECT n, s, 'multiword token range ' || cid || ' ends after the last word of the sentence (' || nwords || ')' "
            "FROM tok WHERE kind = 'm' AND nf = 10 AND CAST(split_part(cid, '-', 2) AS BIGINT) > nwords",
            "SELECT n, s, 'bad empty node ID ' || cid || ': expected ' || wpos || '.N' FROM tok "
            "WHERE kind = 'e' AND nf = 10 AND CAST(split_part(cid, '.', 1) AS BIGINT) <> wpos",
            f"SELECT n, s, 'HEAD ' || head || ' is not a number' FROM tok WHERE kind = 'w' AND nf = 10 "
            f"AND head <> '_' AND NOT regexp_full_match(head, '[0-9]+')",
            f"SELECT n, s, 'HEAD ' || head || ' is out of range: the sentence has ' || nwords || ' words' FROM tok "
            f"WHERE kind = 'w' AND nf = 10 AND {hd} > nwords",
            f"SELECT n, s, 'word ' || cid || ' is its own head' FROM tok WHERE kind = 'w' AND nf = 10 "
            f"AND {hd} = TRY_CAST(cid AS INTEGER)",
            "SELECT min(n) FILTER (WHERE head = '_'), s, 'HEAD is ''_'' here but given for other words of the sentence' "
            "FROM tok WHERE kind = 'w' AND nf = 10 GROUP BY s "
            "HAVING bool_or(head = '_') AND bool_or(head <> '_')",
            f"SELECT coalesce(arg_min(n, n) FILTER (WHERE {hd} = 0 AND rn > 1), min(n)), s, "
            "CASE WHEN count(*) FILTER (WHERE " + hd + " = 0) = 0 THEN "
            "'the dependency tree has no root (no word with HEAD 0): there is a cycle' ELSE "
            "'the dependency tree has ' || count(*) FILTER (WHERE " + hd + " = 0) || "
            "' roots (words with HEAD 0); a sentence has exactly one' END "
            f"FROM (SELECT *, row_number() OVER (PARTITION BY s, {hd} = 0 ORDER BY n) AS rn FROM tok "
            f"WHERE kind = 'w' AND nf = 10) GROUP BY s HAVING bool_and(head <> '_') AND "
            f"count(*) FILTER (WHERE {hd} = 0) <> 1",
            "SELECT c.n, c.s, 'a comment line inside a sentence (comments go before the token lines)' "
            "FROM com c JOIN sent USING (s) WHERE c.n > sent.first_row",
            "SELECT last_comment, s, 'comment lines with no token lines after them' FROM sent WHERE NOT has_rows",
        ]

    def _validate(self) -> set[int]:
        """Bad sentences by number; without --lenient the first bad line is an error."""
        con = self.con
        problems = con.execute(" UNION ALL ".join(f"({q})" for q in self._checks()) + " ORDER BY 1").fetchall()
        # DEPS heads must be words or empty nodes of the sentence
        con.execute("""
            CREATE OR REPLACE TABLE deps AS
            SELECT n, s, cid, item, split_part(item, ':', 1) AS h,
                   substr(item, strpos(item, ':') + 1) AS rel, contains(item, ':') AS ok
            FROM (SELECT n, s, cid, unnest(string_split(deps, '|')) AS item FROM tok
                  WHERE kind IN ('w', 'e') AND nf = 10 AND deps <> '_')""")
        problems += con.execute("""
            SELECT d.n, d.s, 'DEPS item ' || d.item || ': the head must be a word or empty node of this sentence, '
                   || 'followed by '':'' and a relation'
            FROM deps d LEFT JOIN tok t ON t.s = d.s AND t.cid = d.h AND t.kind IN ('w', 'e')
            WHERE NOT d.ok OR (d.h <> '0' AND t.n IS NULL)""").fetchall()
        # sentence ids: unique in this import and against the corpus
        con.execute("""
            CREATE OR REPLACE TABLE sid AS
            SELECT s, min(n) AS n, last(value ORDER BY n) AS sent_id FROM com WHERE key = 'sent_id' GROUP BY s""")
        problems += con.execute("""
            SELECT n, s, 'sentence id ' || sent_id || ' is used twice' FROM (
                SELECT *, row_number() OVER (PARTITION BY sent_id ORDER BY n) AS k FROM sid) WHERE k > 1
            UNION ALL
            SELECT sid.n, sid.s, 'sentence id ' || sid.sent_id || ' is already in ' || seen_ids.src
            FROM sid JOIN seen_ids USING (sent_id)""").fetchall()
        # cycles: checked here so that --lenient can drop the sentence
        problems += self._cycle_problems({p[1] for p in problems})
        if not problems:
            return set()
        problems.sort(key=lambda p: (p[0] is None, p[0]))
        if not self.opt.lenient:
            line, _, message = problems[0]
            raise StrataError(message, file=str(self.path), line=line)
        bad: dict[int, tuple] = {}
        for line, s, message in problems:
            bad.setdefault(s, (line, message))
        for s, (line, message) in sorted(bad.items(), key=lambda kv: kv[1][0] or 0):
            self.report.skipped.append(f"{self.path}:{line}: {message}")
        return set(bad)

    def _cycle_problems(self, flagged: set[int]) -> list[tuple]:
        """Sentences on which every other check passed, and whose tree still has a cycle."""
        self.con.execute("CREATE OR REPLACE TABLE flagged (s BIGINT)")
        if flagged:
            self.con.execute("INSERT INTO flagged SELECT unnest(?)", [sorted(x for x in flagged if x is not None)])
        rows = self.con.sql("""
            SELECT s, n, TRY_CAST(head AS INTEGER) FROM tok
            WHERE kind = 'w' AND s NOT IN (SELECT s FROM flagged) AND s IN (
                SELECT s FROM tok WHERE kind = 'w' AND nf = 10 GROUP BY s
                HAVING bool_and(regexp_full_match(head, '[0-9]+') AND TRY_CAST(head AS INTEGER) <= nwords
                                AND TRY_CAST(head AS INTEGER) <> TRY_CAST(cid AS INTEGER))
                   AND count(*) FILTER (WHERE head = '0') = 1
                   AND bool_and(CAST(cid AS BIGINT) = wpos))
            ORDER BY n""").to_arrow_table()
        if rows.num_rows == 0:
            return []
        s = rows.column(0).to_numpy()
        heads = rows.column(2).to_numpy()
        starts = np.flatnonzero(np.r_[True, s[1:] != s[:-1]])
        try:
            tree_order(heads, starts)
        except TreeError as e:
            lines = rows.column(1).to_numpy()
            out = [(int(lines[i]), int(s[i]), "word " + str(int(i - starts[np.searchsorted(starts, i, 'right') - 1] + 1))
                    + " is on a dependency cycle (it cannot be reached from the root)") for i in e.nodes]
            # keep one problem per sentence, the first line
            seen, first = set(), []
            for p in sorted(out):
                if p[1] not in seen:
                    seen.add(p[1])
                    first.append(p)
            return first
        return []

    def _drop_sentences(self, bad: set[int]) -> None:
        self.con.execute("CREATE OR REPLACE TABLE bad (s BIGINT)")
        if bad:
            self.con.execute("INSERT INTO bad SELECT unnest(?)", [sorted(bad)])
            for t in ("tok", "com", "sent", "sid", "deps"):
                self.con.execute(f"DELETE FROM {t} WHERE s IN (SELECT s FROM bad)")
        self.con.execute("DELETE FROM sent WHERE NOT has_rows")

    # -- documents, text, offsets ------------------------------------------------------
    def _documents(self) -> None:
        con = self.con
        # doc-level comments: after "# newdoc" up to the first newpar/sent_id of that block
        con.execute("""
            CREATE OR REPLACE TABLE com2 AS
            SELECT *, (seen_doc AND NOT ended AND NOT is_newdoc) AS doc_level FROM (
                SELECT c.*, starts_with(c.key, 'newdoc') AS is_newdoc,
                       bool_or(starts_with(c.key, 'newdoc')) OVER w AS seen_doc,
                       bool_or(starts_with(c.key, 'newpar') OR c.key = 'sent_id') OVER w AS ended
                FROM com c WINDOW w AS (PARTITION BY s ORDER BY n ROWS UNBOUNDED PRECEDING))""")
        con.execute("DROP TABLE com")
        con.execute("ALTER TABLE com2 RENAME TO com")
        docs = con.execute("""
            SELECT sent.d, min(sent.s), min(sent.first_line),
                   (SELECT last(c.value ORDER BY c.n) FROM com c JOIN sent s2 USING (s)
                    WHERE s2.d = sent.d AND c.key = 'newdoc id') AS name
            FROM sent GROUP BY sent.d ORDER BY sent.d""").fetchall()
        attrs = con.execute("""
            SELECT sent.d, c.key, c.value FROM com c JOIN sent USING (s) WHERE c.doc_level ORDER BY c.n""").fetchall()
        by_doc: dict[int, dict[str, str]] = {}
        for d, key, value in attrs:
            by_doc.setdefault(d, {})[key[len("meta::"):] if key.startswith("meta::") else key] = value
        self.doc_rows = []
        self.n_docs = 0
        for d, first_s, first_line, name in docs:
            if name is None:
                name = self.path.stem if d == 0 else f"{self.path.stem}-{first_line}"
            self.doc_rows.append((d, name, first_line, by_doc.get(d, {})))
        con.execute("CREATE OR REPLACE TABLE dmap (d BIGINT, name VARCHAR, first_line BIGINT)")
        con.executemany("INSERT INTO dmap VALUES (?, ?, ?)", [r[:3] for r in self.doc_rows])

    def _offsets(self) -> None:
        con = self.con
        # words inside a multiword token: the last range seen in the sentence covers them
        con.execute("""
            CREATE OR REPLACE TABLE tk AS
            SELECT t.*, sent.d,
                   CASE WHEN kind = 'm' THEN CAST(split_part(cid, '-', 1) AS BIGINT) END AS m_first,
                   CASE WHEN kind = 'm' THEN CAST(split_part(cid, '-', 2) AS BIGINT) END AS m_last
            FROM tok t JOIN sent USING (s)""")
        con.execute("""
            CREATE OR REPLACE TABLE tk2 AS
            SELECT *, CASE WHEN kind = 'w' AND cid_i <= cur_last THEN cur_first END AS in_mwt
            FROM (SELECT *, TRY_CAST(cid AS BIGINT) AS cid_i,
                         max(m_last) OVER w AS cur_last, max(m_first) OVER w AS cur_first
                  FROM tk WINDOW w AS (PARTITION BY s ORDER BY n ROWS UNBOUNDED PRECEDING))""")
        con.execute("DROP TABLE tk")
        # surface units: multiword tokens and words outside them, with their separators
        con.execute("""
            CREATE OR REPLACE TABLE unit AS
            SELECT *, length(form) + 1 - (CASE WHEN last_in_sent THEN 0 WHEN no_space THEN 1 ELSE 0 END) AS width,
                   CASE WHEN last_in_sent THEN chr(10) WHEN no_space THEN '' ELSE ' ' END AS sep
            FROM (SELECT n, s, d, cid, form, misc, kind, m_first, m_last,
                         regexp_matches(misc, '(^|\\|)SpaceAfter=No(\\||$)') AS no_space,
                         n = max(n) OVER (PARTITION BY s) AS last_in_sent
                  FROM tk2 WHERE kind = 'm' OR (kind = 'w' AND in_mwt IS NULL))""")
        con.execute("""
            CREATE OR REPLACE TABLE unit2 AS
            SELECT *, sum(width) OVER (PARTITION BY d ORDER BY n ROWS UNBOUNDED PRECEDING) - width AS lstart,
                   row_number() OVER (ORDER BY n) - 1 AS uidx
            FROM unit""")
        con.execute("DROP TABLE unit")
        # document texts, then bases in the global coordinate line
        texts = con.execute("""
            SELECT d, string_agg(form || sep, '' ORDER BY n) FROM unit2 GROUP BY d ORDER BY d""").fetchall()
        bases = []
        for (d, name, first_line, attrs), (d2, text) in zip(self.doc_rows, texts):
            text = text[:-1] if text.endswith("\n") else text
            existing = self.known_docs.get(name)
            if existing is None:
                info = self.batch.add_document(name, text, attrs)
                self.known_docs[name] = info
            else:
                if existing.text != text:
                    at = next((i for i, (a, b) in enumerate(zip(existing.text, text)) if a != b),
                              min(len(existing.text), len(text)))
                    raise StrataError(
                        f"document {name!r} is already in the corpus with a different text (first difference at "
                        f"character {at}: {existing.text[at:at + 20]!r} vs {text[at:at + 20]!r}); layers of the "
                        "same document must share its primary text", file=str(self.path), line=first_line)
                info = existing
            bases.append((d, info.doc, info.base))
            self.n_docs += 1
        con.execute("CREATE OR REPLACE TABLE dbase (d BIGINT, doc INTEGER, base BIGINT)")
        con.executemany("INSERT INTO dbase VALUES (?, ?, ?)", bases)
        # ids: sentences, tokens, words, empty nodes each get a consecutive block
        n_sent = con.execute("SELECT count(*) FROM sent").fetchone()[0]
        n_tok = con.execute("SELECT count(*) FROM tk2 WHERE kind = 'w'").fetchone()[0]
        n_unit = con.execute("SELECT count(*) FROM unit2").fetchone()[0]
        n_empty = con.execute("SELECT count(*) FROM tk2 WHERE kind = 'e'").fetchone()[0]
        self.ids = {"sent": self.batch.alloc_ids(n_sent), "tok": self.batch.alloc_ids(n_tok),
                    "word": self.batch.alloc_ids(n_unit), "empty": self.batch.alloc_ids(n_empty)}
        self.counts = {"sent": n_sent, "tok": n_tok, "unit": n_unit, "empty": n_empty}
        con.execute(f"""
            CREATE OR REPLACE TABLE sent2 AS
            SELECT sent.*, {self.ids['sent']} + row_number() OVER (ORDER BY s) - 1 AS sid FROM sent""")
        con.execute(f"""
            UPDATE unit2 SET uidx = uidx + {self.word_ord}""")
        # syntactic words: outside a multiword token they are their unit; inside, they tile it
        con.execute(f"""
            CREATE OR REPLACE TABLE w AS
            WITH words AS (
                SELECT t.*, row_number() OVER (ORDER BY t.n) - 1 AS widx,
                       sum(length(t.form)) OVER (PARTITION BY t.s, t.in_mwt ORDER BY t.n ROWS UNBOUNDED PRECEDING)
                           AS part_end,
                       t.cid_i = max(t.cid_i) OVER (PARTITION BY t.s, t.in_mwt) AS last_part
                FROM tk2 t WHERE t.kind = 'w')
            SELECT words.*, u.uidx, u.lstart AS ustart, length(u.form) AS ulen,
                   CASE WHEN words.in_mwt IS NULL THEN u.lstart
                        ELSE u.lstart + least(words.part_end - length(words.form), length(u.form)) END AS lstart,
                   CASE WHEN words.in_mwt IS NULL OR words.last_part THEN u.lstart + length(u.form)
                        ELSE u.lstart + least(words.part_end, length(u.form)) END AS lend
            FROM words JOIN unit2 u ON u.s = words.s
                AND (CASE WHEN u.kind = 'm' THEN u.m_first ELSE -u.n END)
                  = (CASE WHEN words.in_mwt IS NULL THEN -words.n ELSE words.in_mwt END)""")
        con.execute(f"UPDATE w SET widx = widx + {self.tok_ord}")
        self.tok_ord += n_tok
        self.word_ord += n_unit

    # -- trees ---------------------------------------------------------------------------
    def _trees(self) -> None:
        con = self.con
        rows = con.sql("""
            SELECT s, TRY_CAST(head AS INTEGER) AS h FROM w ORDER BY n""").to_arrow_table()
        s = rows.column(0).to_numpy()
        heads = rows.column(1).to_numpy(zero_copy_only=False)
        n = len(s)
        if n == 0:
            self.tree = pa.table({"widx": pa.array([], pa.int64())})
            return
        starts = np.flatnonzero(np.r_[True, s[1:] != s[:-1]])
        has_tree = ~np.isnan(heads.astype(float)) if heads.dtype.kind == "f" else np.ones(n, bool)
        h = np.where(has_tree, np.nan_to_num(heads.astype(float), nan=-1), -1).astype(np.int64)
        sent_has = np.zeros(n, bool)
        # sentences where every HEAD is given get a tree; others ('_' everywhere) get none
        seg = np.add.reduceat(has_tree.astype(np.int64), starts)
        full = seg == np.diff(np.r_[starts, n])
        sent_has[np.repeat(full, np.diff(np.r_[starts, n]))] = True
        idx = np.flatnonzero(sent_has)
        pre = np.full(n, -1, np.int64)
        post = np.full(n, -1, np.int64)
        depth = np.full(n, -1, np.int64)
        parent = np.full(n, -1, np.int64)
        if len(idx):
            sub_heads = h[idx]
            sub_s = s[idx]
            sub_starts = np.flatnonzero(np.r_[True, sub_s[1:] != sub_s[:-1]])
            order = tree_order(sub_heads, sub_starts)
            pre[idx] = order.entry + self.order
            post[idx] = order.exit + self.order
            depth[idx] = order.depth
            gpar = order.parent
            parent[idx] = np.where(gpar >= 0, idx[np.maximum(gpar, 0)], -1)
            self.order += 2 * len(idx)
        self.tree = pa.table({
            "row": pa.array(np.arange(n)),
            "pre": pa.array(pre, mask=pre < 0), "post": pa.array(post, mask=post < 0),
            "depth": pa.array(depth, mask=depth < 0), "parent_row": pa.array(parent, mask=parent < 0)})
        con.register("tree_arrow", self.tree)
        con.execute("CREATE OR REPLACE TABLE tree AS SELECT * FROM tree_arrow")
        con.unregister("tree_arrow")

    # -- mentions ------------------------------------------------------------------------
    def _mentions(self) -> None:
        con = self.con
        con.execute(f"""
            CREATE OR REPLACE TABLE ent AS
            SELECT n, s, d, widx, item, i,
                   CASE WHEN starts_with(item, '(') AND ends_with(item, ')') THEN 'single'
                        WHEN starts_with(item, '(') THEN 'open' ELSE 'close' END AS typ,
                   CASE WHEN starts_with(item, '(') THEN split_part(trim(item, '()'), '-', 1)
                        ELSE rtrim(item, ')') END AS key,
                   trim(item, '()') AS spec, value
            FROM (SELECT n, s, d, widx, value, unnest(items) AS item, generate_subscripts(items, 1) AS i FROM (
                    SELECT n, s, d, widx, value, regexp_extract_all(value, {_q(_ITEM_RE)}) AS items FROM (
                        SELECT n, s, d, widx, regexp_extract(misc, '(?:^|\\|)Entity=([^|]*)', 1) AS value FROM w
                        WHERE contains(misc, 'Entity='))))""")
        # a value that the items do not cover entirely is malformed
        bad = con.execute("""
            SELECT min(n), any_value(value) FROM (SELECT n, value, string_agg(item, '' ORDER BY i) AS joined
                FROM ent GROUP BY n, value) WHERE joined <> value""").fetchone()
        if bad[0] is not None:
            self._mention_problem(bad[0], f"cannot read the Entity value {bad[1]!r} "
                                          "(expected '(id-...', 'id)' or '(id-...)')")
        # pair brackets per (document, id) by nesting level
        con.execute("""
            CREATE OR REPLACE TABLE ev AS
            SELECT *, CASE WHEN typ = 'close' THEN r + 1 ELSE r END AS lvl FROM (
                SELECT *, sum(CASE typ WHEN 'open' THEN 1 WHEN 'close' THEN -1 ELSE 0 END)
                          OVER (PARTITION BY d, key ORDER BY n, i ROWS UNBOUNDED PRECEDING) AS r
                FROM ent WHERE typ <> 'single')""")
        con.execute("""
            CREATE OR REPLACE TABLE ev2 AS
            SELECT *, row_number() OVER (PARTITION BY d, key, lvl, typ ORDER BY n, i) AS k FROM ev""")
        neg = con.execute("SELECT min(n), any_value(key) FROM ev2 WHERE lvl <= 0").fetchone()
        if neg[0] is not None:
            self._mention_problem(neg[0], f"entity bracket '{neg[1]})' closes a mention that was never opened")
        con.execute("""
            CREATE OR REPLACE TABLE pairs AS
            SELECT row_number() OVER () AS pid, * FROM (
            SELECT o.n AS n_open, o.s AS s_open, o.widx AS w0, c.widx AS w1, c.s AS s_close, o.spec, o.d, o.key,
                   c.n AS n_close
            FROM (SELECT * FROM ev2 WHERE typ = 'open') o
            LEFT JOIN (SELECT * FROM ev2 WHERE typ = 'close') c USING (d, key, lvl, k)
            UNION ALL
            SELECT n, s, widx, widx, s, spec, d, key, n FROM ent WHERE typ = 'single')""")
        unclosed = con.execute("SELECT min(n_open), any_value(key) FROM pairs WHERE w1 IS NULL").fetchone()
        if unclosed[0] is not None:
            self._mention_problem(unclosed[0], f"entity bracket '({unclosed[1]}' opened here is never closed")
        crossing = con.execute("SELECT min(n_close), any_value(key) FROM pairs WHERE s_close <> s_open").fetchone()
        if crossing[0] is not None:
            self._mention_problem(crossing[0], f"entity mention '{crossing[1]}' closes in another sentence "
                                               "than it opened")
        con.execute("DELETE FROM pairs WHERE w1 IS NULL OR s_close <> s_open")

    def _mention_problem(self, line: int, message: str) -> None:
        if not self.opt.lenient:
            raise StrataError(message, file=str(self.path), line=line)
        self.report.warnings.append(f"{self.path}:{line}: {message} (mention dropped)")

    # -- writing -------------------------------------------------------------------------
    def _copy(self, layer: str, select: str) -> int:
        """Write ``select`` as a staged part of ``layer``, with the full anchor schema first."""
        path = self.batch.stage / f"{layer}--c{self.n_file:04d}.parquet"
        have = {r[0] for r in self.con.execute(f"DESCRIBE {select}").fetchall()}
        required = EDGE_COLUMNS if self.batch.layer_kind(layer) == "edges" else ANCHOR_COLUMNS
        head = [f"CAST({_ident(c) if c in have else 'NULL'} AS {_DUCK_TYPES[t]}) AS {_ident(c)}"
                for c, t in required.items()]
        rest = [c for c in have if c not in required]
        order = "ORDER BY " + ("src" if required is EDGE_COLUMNS else "id")
        cols = ", ".join(head + [_ident(c) for c in sorted(rest, key=self._column_rank(select))])
        select = f"SELECT {cols} FROM ({select}) {order}"
        self.con.execute(f"COPY ({select}) TO {_q(str(path))} (FORMAT parquet, COMPRESSION zstd, "
                         f"ROW_GROUP_SIZE 122880)")
        rows = self.con.execute(f"SELECT count(*) FROM read_parquet({_q(str(path))})").fetchone()[0]
        if rows == 0:
            path.unlink()
            return 0
        self.batch.add_staged(layer, path, rows)
        return rows

    def _column_rank(self, select: str):
        """Keep the select's own column order for the attribute columns."""
        names = [r[0] for r in self.con.execute(f"DESCRIBE {select}").fetchall()]
        pos = {c: i for i, c in enumerate(names)}
        return lambda c: pos[c]

    def _flat(self, table: str, col: str, where: str = "TRUE") -> str:
        """``, nullif(regexp_extract(...)) AS "col.Key"`` for every key seen in ``col``."""
        keys = [k for (k,) in self.con.execute(
            f"SELECT DISTINCT split_part(unnest(string_split({col}, '|')), '=', 1) AS k FROM {table} "
            f"WHERE {col} <> '_' AND {where} ORDER BY k").fetchall() if k]
        out = []
        x = f"('|' || {col})"
        for k in keys:
            needle = _q("|" + k + "=")
            out.append(f", nullif(CASE WHEN contains({x}, {needle}) THEN split_part(substr({x}, strpos({x}, {needle}) "
                       f"+ {len(k) + 2}), '|', 1) END, '') AS {_ident(col + '.' + k)}")
        return "".join(out)

    def _write(self) -> None:
        con, N, ids = self.con, self.names, self.ids
        nul = lambda c: f"nullif({c}, '_')"
        anchors = "db.doc AS doc, db.base + {s} AS start, db.base + {e} AS \"end\""
        # tokens
        tid = f"{ids['tok']} + (w.widx - {self.tok_ord - self.counts['tok']})"
        tok_base = self.tok_ord - self.counts["tok"]
        con.execute(f"""
            CREATE OR REPLACE TABLE tok_out AS
            SELECT {tid} AS id, {anchors.format(s='w.lstart', e='w.lend')}, s2.sid AS sent, w.widx AS ord,
                   w.widx AS tok_first, w.widx AS tok_last, w.uidx AS word_first, w.uidx AS word_last,
                   w.cid, w.form, w.lemma, {nul('w.upos')} AS upos, {nul('w.xpos')} AS xpos,
                   {nul('w.feats')} AS feats, TRY_CAST(w.head AS INTEGER) AS head_num, {nul('w.deprel')} AS deprel,
                   {nul('w.deps')} AS deps, {nul('w.misc')} AS misc,
                   CASE WHEN tr.parent_row IS NOT NULL THEN {ids['tok']} + tr.parent_row END AS parent,
                   CAST(tr.depth AS INTEGER) AS depth, tr.pre, tr.post, w.s, w.n
            FROM w JOIN dbase db USING (d) JOIN sent2 s2 USING (s)
            LEFT JOIN tree tr ON tr.row = w.widx - {tok_base}""")
        n_tok = self._copy(N["token"], "SELECT * EXCLUDE (s, n)" + self._flat("tok_out", "feats") +
                           self._flat("tok_out", "misc") + " FROM tok_out ORDER BY id")
        # surface words
        con.execute(f"""
            CREATE OR REPLACE TABLE word_out AS
            SELECT {ids['word']} + (u.uidx - {self.word_ord - self.counts['unit']}) AS id,
                   {anchors.format(s='u.lstart', e='u.lstart + length(u.form)')}, s2.sid AS sent, u.uidx AS ord,
                   r.tok_first, r.tok_last, u.uidx AS word_first, u.uidx AS word_last,
                   u.cid, u.form, u.kind = 'm' AS mwt,
                   CASE WHEN u.kind = 'm' THEN m.lemma || chr(9) || m.upos || chr(9) || m.xpos || chr(9) ||
                        m.feats || chr(9) || m.head || chr(9) || m.deprel || chr(9) || m.deps END AS mwt_fields,
                   CASE WHEN u.kind = 'm' THEN {nul('u.misc')} END AS misc
            FROM unit2 u JOIN dbase db USING (d) JOIN sent2 s2 USING (s)
            JOIN (SELECT uidx, min(widx) AS tok_first, max(widx) AS tok_last FROM w GROUP BY uidx) r USING (uidx)
            LEFT JOIN tk2 m ON m.n = u.n AND u.kind = 'm'""")
        n_word = self._copy(N["word"], "SELECT *" + self._flat("word_out", "misc") + " FROM word_out ORDER BY id")
        # empty nodes: zero width at the end of the word they follow
        con.execute(f"""
            CREATE OR REPLACE TABLE empty_out AS
            SELECT {ids['empty']} + row_number() OVER (ORDER BY e.n) - 1 AS id,
                   {anchors.format(s='coalesce(w.lend, s0.lstart)', e='coalesce(w.lend, s0.lstart)')},
                   s2.sid AS sent, e.cid, e.form, e.lemma, {nul('e.upos')} AS upos, {nul('e.xpos')} AS xpos,
                   {nul('e.feats')} AS feats, {nul('e.deps')} AS deps, {nul('e.misc')} AS misc, e.s, e.n
            FROM tk2 e JOIN dbase db USING (d) JOIN sent2 s2 USING (s)
            LEFT JOIN w ON w.s = e.s AND w.cid_i = CAST(split_part(e.cid, '.', 1) AS BIGINT)
            LEFT JOIN (SELECT s, min(lstart) AS lstart FROM w GROUP BY s) s0 ON s0.s = e.s
            WHERE e.kind = 'e'""")
        n_empty = self._copy(N["empty"], "SELECT * EXCLUDE (s, n)" + self._flat("empty_out", "feats") +
                             self._flat("empty_out", "misc") + " FROM empty_out ORDER BY id")
        # sentences with their comment attributes as columns
        keys = [k for (k,) in con.execute("""
            SELECT DISTINCT key FROM com WHERE NOT doc_level AND NOT starts_with(key, 'newdoc')
              AND key NOT IN ('sent_id', 'text', '') ORDER BY key""").fetchall()]
        reserved = {"id", "doc", "start", "end", "t_start", "t_end", "sent", "tok_first", "tok_last", "word_first",
                    "word_last", "sent_id", "text", "comments"}
        attr_cols = "".join(
            f", last(value ORDER BY n) FILTER (WHERE key = {_q(k)} AND NOT doc_level) "
            f"AS {_ident(k if k not in reserved else 'comment.' + k)}" for k in keys)
        con.execute("""
            CREATE OR REPLACE TABLE sent_out AS
            SELECT s2.sid AS id, db.doc AS doc, db.base + min(w.lstart) AS start, db.base + max(w.lend) AS "end",
                   s2.sid AS sent, min(w.widx) AS tok_first, max(w.widx) AS tok_last,
                   min(w.uidx) AS word_first, max(w.uidx) AS word_last, s2.s
            FROM sent2 s2 JOIN dbase db USING (d) JOIN w USING (s)
            GROUP BY s2.sid, s2.s, db.doc, db.base""")
        con.execute(f"""
            CREATE OR REPLACE TABLE sent_attrs AS
            SELECT s, last(value ORDER BY n) FILTER (WHERE key = 'sent_id') AS sent_id,
                   last(value ORDER BY n) FILTER (WHERE key = 'text') AS text,
                   string_agg(line, chr(10) ORDER BY n) AS comments{attr_cols}
            FROM com c GROUP BY s""")
        con.execute("""
            CREATE OR REPLACE TABLE sent_out2 AS
            SELECT o.* EXCLUDE (s), a.* EXCLUDE (s, comments), coalesce(a.comments, '') AS comments
            FROM sent_out o LEFT JOIN sent_attrs a USING (s)""")
        con.execute("DROP TABLE sent_out")
        con.execute("ALTER TABLE sent_out2 RENAME TO sent_out")
        n_sent = self._copy(N["sentence"], "SELECT * FROM sent_out ORDER BY id")
        # text check: the "# text" comment must equal the rebuilt sentence
        mismatches = con.execute("""
            SELECT s2.first_line, o.sent_id FROM sent_out o JOIN sent2 s2 ON s2.sid = o.id
            JOIN documents_text dt ON dt.doc = o.doc
            WHERE o.text IS NOT NULL AND o.text <> substr(dt.text, CAST(o.start - dt.base + 1 AS INTEGER),
                                                          CAST(o."end" - o.start AS INTEGER))
            ORDER BY 1 LIMIT 50""").fetchall() if self._register_texts() else []
        for line, sid in mismatches:
            self.report.warnings.append(f"{self.path}:{line}: the '# text' of sentence {sid} differs from its tokens "
                                        "joined by SpaceAfter")
        # dependency edges
        self._copy(N["dep"], f"""
            SELECT t.id AS src, h.id AS dst, t.deprel AS label, t.doc FROM tok_out t
            JOIN tok_out h ON h.s = t.s AND TRY_CAST(h.cid AS INTEGER) = t.head_num WHERE t.head_num > 0
            ORDER BY t.id""")
        con.execute("CREATE OR REPLACE TABLE node_ids AS SELECT s, cid, id FROM tok_out UNION ALL "
                    "SELECT s, cid, id FROM empty_out")
        self._copy(N["enhanced"], f"""
            SELECT a.id AS src, b.id AS dst, d.rel AS label, db.doc FROM deps d
            JOIN sent USING (s) JOIN dbase db USING (d)
            JOIN node_ids a ON a.s = d.s AND a.cid = d.cid
            LEFT JOIN node_ids b ON b.s = d.s AND b.cid = d.h
            ORDER BY d.n, d.item""")
        n_mentions, n_chains = self._write_mentions()
        self.report.add("sentences", n_sent)
        self.report.add("tokens", n_tok)
        self.report.add("words", n_word)
        self.report.add("multiword tokens", con.execute("SELECT count(*) FROM unit2 WHERE kind = 'm'").fetchone()[0])
        self.report.add("empty nodes", n_empty)
        self.report.add("mentions", n_mentions)
        self.report.add("chains", n_chains)

    def _register_texts(self) -> bool:
        rows = [(d.doc, d.base, d.text) for d in self.known_docs.values()]
        self.con.execute("CREATE OR REPLACE TABLE documents_text (doc INTEGER, base BIGINT, text VARCHAR)")
        self.con.executemany("INSERT INTO documents_text VALUES (?, ?, ?)", rows)
        return True

    def _write_mentions(self) -> tuple[int, int]:
        """Mentions with chain ids: the mentions of one entity id in one document.

        The identity relation "same entity id" makes every chain a clique, so its graph
        components are the groups by (document, entity id): a grouping gives the same
        components as a graph search, in one vectorised pass.
        """
        con = self.con
        n = con.execute("SELECT count(*) FROM pairs").fetchone()[0]
        if n == 0:
            return 0, 0
        specs = dict(con.execute("""
            SELECT dmap.d, coalesce(max(c.value), ?) FROM dmap LEFT JOIN sent USING (d)
            LEFT JOIN com c ON c.s = sent.s AND c.key = 'global.Entity' GROUP BY dmap.d""",
                                 [DEFAULT_ENTITY_FIELDS]).fetchall())
        first_id = self.batch.alloc_ids(n)
        n_chains = con.execute("SELECT count(DISTINCT (d, split_part(key, '[', 1))) FROM pairs").fetchone()[0]
        first_chain = self.batch.alloc_chains(n_chains)
        selects = []
        for spec in sorted(set(specs.values())):
            fields = spec.split("-")
            docs = [d for d, sp in specs.items() if sp == spec]
            cols = []
            for k, name in enumerate(fields[1:], start=2):
                col = "type" if name == "etype" else name
                if col in ("entity", "id", "doc", "start", "end", "sent", "chain", "chain_pos", "first_mention"):
                    col = "entity." + col
                if k < len(fields):
                    expr = f"nullif(string_split(p.spec, '-')[{k}], '')"
                else:
                    expr = f"nullif(array_to_string(string_split(p.spec, '-')[{k}:], '-'), '')"
                cols.append(f"{expr} AS {_ident(col)}")
            selects.append(f"SELECT p.*, {', '.join(cols) if cols else 'NULL AS type'} FROM pairs p "
                           f"WHERE p.d IN ({', '.join(str(int(d)) for d in docs)})")
        con.execute("CREATE OR REPLACE TABLE pairs2 AS " + " UNION ALL BY NAME ".join(selects))
        con.execute(f"""
            CREATE OR REPLACE TABLE mention_out AS
            SELECT *, chain_pos = 0 AS first_mention FROM (
                SELECT {first_id} + row_number() OVER (ORDER BY a.start, a."end" DESC, p.n_open) - 1 AS id,
                       a.doc, a.start, a."end", a.sent, a.tok_first, a.tok_last, a.word_first, a.word_last,
                       split_part(p.key, '[', 1) AS entity,
                       {first_chain} + dense_rank() OVER (ORDER BY p.d, split_part(p.key, '[', 1)) - 1 AS chain,
                       row_number() OVER (PARTITION BY p.d, split_part(p.key, '[', 1)
                                          ORDER BY a.start, a."end" DESC, p.n_open) - 1 AS chain_pos,
                       p.* EXCLUDE (pid, n_open, s_open, w0, w1, s_close, spec, d, key, n_close)
                FROM pairs2 p JOIN (
                    SELECT p.pid, t0.doc, t0.start, t1."end", t0.sent, t0.ord AS tok_first,
                           t1.ord AS tok_last, t0.word_first, t1.word_last
                    FROM pairs p JOIN tok_out t0 ON t0.ord = p.w0 JOIN tok_out t1 ON t1.ord = p.w1) a
                USING (pid))""")
        rows = self._copy(self.names["mention"], "SELECT * FROM mention_out ORDER BY id")
        return rows, n_chains

    def close(self) -> None:
        self.batch.set_meta("next_order", self.order)
        self.con.close()


_DUCK_TYPES = {pa.int64(): "BIGINT", pa.int32(): "INTEGER", pa.float64(): "DOUBLE", pa.string(): "VARCHAR"}


def _raise_bad_utf8(path: Path) -> None:
    with open(path, "rb") as f:
        for number, raw in enumerate(f, 1):
            try:
                raw.decode("utf-8")
            except UnicodeDecodeError as e:
                raise StrataError(f"invalid UTF-8 at byte {e.start} of the line", file=str(path), line=number) from None
    raise StrataError("invalid UTF-8", file=str(path))


def import_files(batch: Batch, paths: list[Path], options: ImportOptions) -> ImportReport:
    """Import CoNLL-U files into ``batch``; raises StrataError at the first bad place."""
    imp = ConlluImporter(batch, options)
    try:
        for path in paths:
            imp.import_file(Path(path))
    finally:
        imp.close()
    return imp.report
