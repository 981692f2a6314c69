"""Character-level alignment of a layer's leaves to a document's primary text.

The leaves of a whole document are normalised and concatenated, the text is
normalised, and one global edit-distance alignment (edlib, mode NW) maps every leaf
character to a text character or to a gap. Global, not infix: with free text ends a
last word behind dropped punctuation ("time\". [5]") would rather be left out than
matched. A caller whose leaves cover only part of a text passes that part; a caller
with many parts (trees sentence by sentence) passes them all to :func:`align_segments`,
which aligns each on its own in one pass of array work.

A stretch whose normalised leaves are the normalised text character for character
needs no edit distance: its only optimal alignment pairs character ``k`` with
character ``k`` (any gap costs), so it is found by one numpy comparison, and edlib
runs only on the stretches that differ. Offset arrays map the alignment back to
leaves and original characters, and the classes below are decided by array
comparisons, so no Python loop runs per leaf (only per distinct form, and for the
few leaves that are not exact).

Each leaf gets a class:

* ``exact``: the text under its span is the leaf as written;
* ``normalised``: equal after :mod:`engine.align.normalise` (case, quotes, escapes);
* ``fuzzy``: at least :data:`FUZZY_MIN` of its characters match the text it spans;
* ``event``: a ``{laugh}``-style event that the text does not have (a point);
* ``unaligned``: none of that; kept as a point after the previous aligned leaf.
"""
from __future__ import annotations

import re
from dataclasses import dataclass
from typing import Sequence

import edlib
import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from engine.align.normalise import is_event, normalise_form, normalise_text
from engine.align.settle import FUZZY_MIN, settle_fuzzy, word_cuts

__all__ = ["FUZZY_MIN", "Alignment", "align_forms", "align_segments"]

#: edlib maps symbols to bytes: at most this many distinct characters per alignment.
_EDLIB_ALPHABET = 256
CLASSES = ("exact", "normalised", "fuzzy", "event", "unaligned")
GOOD = ("exact", "normalised", "fuzzy")
_EXACT, _NORMALISED, _FUZZY, _EVENT, _UNALIGNED = range(5)
_CLASS_NAMES = np.array(CLASSES, dtype=object)
_CIGAR = re.compile(r"(\d+)([=XID])")


@dataclass
class Alignment:
    """Per leaf: local character span ``[start, end)``, class and share of matching characters."""
    start: np.ndarray
    end: np.ndarray
    cls: list[str]
    score: np.ndarray

    def good(self) -> int:
        return sum(1 for c in self.cls if c in GOOD)


def align_forms(text: str, forms: Sequence[str], lo: int = 0, hi: int | None = None) -> Alignment:
    """Align ``forms`` (in order) to ``text[lo:hi]``; spans are character offsets into ``text``.

    Unaligned leaves before the first aligned one are put at ``lo``.
    """
    hi = len(text) if hi is None else hi
    return align_segments(text, forms, np.array([0, len(forms)]), np.array([lo]), np.array([hi]))


def _codes(s: str) -> np.ndarray:
    return np.frombuffer(s.encode("utf-32-le"), dtype=np.uint32)


def _gather(offsets: np.ndarray, lens: np.ndarray) -> np.ndarray:
    """Concatenated index ranges ``offsets[i] .. offsets[i] + lens[i]``."""
    total = int(lens.sum())
    first = np.cumsum(lens) - lens
    return np.arange(total, dtype=np.int64) + np.repeat(offsets - first, lens)


def align_segments(text: str, forms: Sequence[str], cuts: np.ndarray, lo: np.ndarray, hi: np.ndarray
                   ) -> Alignment:
    """Align ``forms[cuts[i]:cuts[i + 1]]`` to ``text[lo[i]:hi[i]]``, each segment on its own.

    The same result as :func:`align_forms` per segment, concatenated.
    """
    cuts, lo, hi = (np.asarray(x, dtype=np.int64) for x in (cuts, lo, hi))
    n, n_seg = len(forms), len(lo)
    seg_of = np.repeat(np.arange(n_seg), np.diff(cuts))
    # the text part the segments cover, normalised once; each segment is a slice of it
    t_lo, t_hi = (int(lo.min()), int(hi.max())) if n_seg else (0, 0)
    target, origin = normalise_text(text[t_lo:t_hi])
    origin = origin + t_lo
    tcodes = _codes(target)
    ta = np.searchsorted(origin, lo, side="left")
    tb = np.maximum(np.searchsorted(origin, hi, side="left"), ta)
    braces = np.flatnonzero(tcodes == ord("{"))
    seg_events = np.searchsorted(braces, tb) > np.searchsorted(braces, ta)
    # per distinct form: event or not, normal form, its characters
    enc = pc.dictionary_encode(pa.array(forms, pa.string()))
    idx = enc.indices.to_numpy(zero_copy_only=False).astype(np.int64) if n else np.zeros(0, np.int64)
    u_forms = enc.dictionary.to_pylist()
    u_event = np.array([is_event(f) for f in u_forms], dtype=bool)
    u_parts = [normalise_form(f) for f in u_forms]
    u_len = np.array([len(p) for p in u_parts], dtype=np.int64)
    u_off = np.cumsum(u_len) - u_len
    u_codes = _codes("".join(u_parts))
    event = u_event[idx]
    # events the text does not have are not aligned: they would only be gaps
    use = ~(event & ~seg_events[seg_of])
    lens = np.where(use, u_len[idx], 0)
    qcodes = u_codes[_gather(u_off[idx], lens)]
    q_first = np.cumsum(lens) - lens                       # first query character of every leaf
    q_cut = np.concatenate([[0], np.cumsum(lens)])[cuts]   # query characters per segment
    q_len, t_len = np.diff(q_cut), tb - ta
    # per query character: its target character, or -1 (a gap); equal or not
    t_of_q = np.full(len(qcodes), -1, dtype=np.int64)
    eq_of_q = np.zeros(len(qcodes), dtype=bool)
    seg_of_q = np.repeat(np.arange(n_seg), q_len)
    same_len = (q_len == t_len)[seg_of_q]
    diagonal = np.arange(len(qcodes), dtype=np.int64) - q_cut[:-1][seg_of_q] + ta[seg_of_q]
    differ = np.bincount(seg_of_q[same_len][qcodes[same_len] != tcodes[diagonal[same_len]]], minlength=n_seg)
    identical = (q_len == t_len) & (differ == 0)
    on_diag = identical[seg_of_q]
    t_of_q[on_diag] = diagonal[on_diag]
    eq_of_q[on_diag] = True
    for s in np.flatnonzero(~identical & (q_len > 0) & (t_len > 0)).tolist():
        qa, qb, a, b = int(q_cut[s]), int(q_cut[s + 1]), int(ta[s]), int(tb[s])
        cq, ct, ceq = _columns(qcodes[qa:qb].tobytes().decode("utf-32-le"), target[a:b])
        t_of_q[qa + cq] = a + ct
        eq_of_q[qa + cq] = ceq
    # per leaf: matched characters, first and last target character (the path is monotone)
    start = np.full(n, -1, dtype=np.int64)
    end = np.full(n, -1, dtype=np.int64)
    score = np.zeros(n, dtype=np.float64)
    nonempty = np.flatnonzero(lens > 0)
    if len(nonempty) and len(target):
        bounds = q_first[nonempty]
        matched = t_of_q >= 0
        big = np.iinfo(np.int64).max
        n_eq = np.add.reduceat(eq_of_q.astype(np.int64), bounds)
        tmin = np.minimum.reduceat(np.where(matched, t_of_q, big), bounds)
        tmax = np.maximum.reduceat(t_of_q, bounds)
        has = n_eq > 0
        width = np.where(has, tmax - tmin + 1, 0)
        score[nonempty] = np.where(has, n_eq / np.maximum(np.maximum(lens[nonempty], width), 1), 0.0)
        # back to original characters: first char of the first, past the last
        start[nonempty] = np.where(has, origin[np.where(has, tmin, 0)], -1)
        end[nonempty] = np.where(has, origin[np.where(has, tmax, 0)] + 1, -1)
    cls = _classify(text, t_lo, t_hi, idx, u_forms, u_parts, use, event, start, end, score)
    # fuzzy leaves and leaves cutting a word are placed again on whole words of one sentence
    # (engine/align/settle.py); a leaf whose cut a fuzzy neighbour took until it moved is
    # placed in a second round
    leaf_of_q = np.repeat(np.arange(n), lens)
    for _ in range(2):
        cuts = word_cuts(text, cls, start, end, seg_of)
        todo = np.flatnonzero(cuts | (cls == _FUZZY)) if _ == 0 else np.flatnonzero(cuts)
        if not len(todo):
            break
        cls[todo] = _FUZZY
        eq = eq_of_q & (t_of_q >= 0) & np.isin(leaf_of_q, todo)
        settle_fuzzy(text, t_lo, lambda i: u_forms[idx[i]], cls, start, end, score, leaf_of_q[eq],
                     origin[t_of_q[eq]], seg_of, lo, hi, leaves=todo)
    # events and unaligned leaves: a point at the end of the previous aligned leaf of the segment
    point = (cls == _EVENT) | (cls == _UNALIGNED)
    if point.any():
        j = np.arange(n)
        last = np.maximum.accumulate(np.where(point, -1, j))
        prev = np.where(last >= cuts[:-1][seg_of], end[np.maximum(last, 0)], lo[seg_of])
        start[point] = end[point] = prev[point]
        score[cls == _UNALIGNED] = 0.0
    return Alignment(start, end, _CLASS_NAMES[cls].tolist(), score)


def _classify(text: str, t_lo: int, t_hi: int, idx: np.ndarray, u_forms: list[str], u_parts: list[str],
              use: np.ndarray, event: np.ndarray, start: np.ndarray, end: np.ndarray, score: np.ndarray
              ) -> np.ndarray:
    """Class code of every leaf; ``exact`` by comparing character codes, the rest per leaf."""
    n = len(idx)
    cls = np.full(n, _UNALIGNED, dtype=np.int8)
    aligned = use & (start >= 0)
    cls[~use | (~aligned & event)] = _EVENT
    u_len = np.array([len(f) for f in u_forms], dtype=np.int64)
    flen = u_len[idx]
    cand = np.flatnonzero(aligned & (end - start == flen))
    if len(cand):
        xcodes = _codes(text[t_lo:t_hi])
        u_codes = _codes("".join(u_forms))
        u_off = np.cumsum(u_len) - u_len
        ln = flen[cand]
        fc = u_codes[_gather(u_off[idx[cand]], ln)]
        tc = xcodes[_gather(start[cand] - t_lo, ln)]
        owner = np.repeat(np.arange(len(cand)), ln)
        bad = np.bincount(owner[fc != tc], minlength=len(cand))
        cls[cand[bad == 0]] = _EXACT
    for i in np.flatnonzero(aligned & (cls != _EXACT)).tolist():
        if normalise_form(text[start[i]:end[i]]) == u_parts[idx[i]]:
            cls[i] = _NORMALISED
        elif score[i] >= FUZZY_MIN:
            cls[i] = _FUZZY
    return cls


def _columns(query: str, target: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Matched columns of the alignment: query index, target index, equal or not."""
    q, t = _alphabet_safe(query, target)
    res = edlib.align(q, t, mode="NW", task="path")
    pairs = _CIGAR.findall(res["cigar"] or "")
    counts = np.fromiter((int(k) for k, _ in pairs), dtype=np.int64, count=len(pairs))
    ops = np.array([op for _, op in pairs], dtype="<U1")
    per_col = np.repeat(ops, counts)
    q_adv = per_col != "D"
    t_adv = per_col != "I"
    qpos = np.cumsum(q_adv) - 1
    tpos = np.cumsum(t_adv) - 1
    matched = q_adv & t_adv
    return qpos[matched], tpos[matched], (per_col[matched] == "=")


def _alphabet_safe(query: str, target: str) -> tuple[str, str]:
    """Map rare characters to one shared stand-in when there are too many distinct ones.

    edlib handles at most 256 symbols; a stand-in only lets rare characters pair up
    with each other, and the classes are decided on the original strings afterwards.
    """
    chars = set(query) | set(target)
    if len(chars) <= _EDLIB_ALPHABET:
        return query, target
    from collections import Counter
    freq = Counter(target) + Counter(query)
    keep = {c for c, _ in freq.most_common(_EDLIB_ALPHABET - 1)}
    stand_in = "\x00"
    table = {ord(c): stand_in for c in chars if c not in keep}
    return query.translate(table), target.translate(table)
