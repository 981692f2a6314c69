"""Fuzzy leaves settle on whole words of the text, inside one sentence, never on a neighbour's.

The character alignment of :mod:`engine.align.sequence` minimises edits over a whole
document. Where the leaves and the text differ it is free to pair a leaf's letters
with letters of a word the leaves dropped, or of a word across a sentence end:
"two" in "twenty two of them" against "22 of them" may take the "o" of "of". That is
a cheap edit script and a wrong place. So every leaf that matched only fuzzily is
placed again, by words:

* the text is cut into *pieces*: runs of word characters (inner apostrophes,
  points and commas kept: "don't", "1,000"; a hyphen parts two pieces, as a speaker
  says "chlorine containing") less the characters an exact or normalised leaf
  already spans;
* a fuzzy leaf claims the pieces its matching characters fell in; a piece that two
  leaves claim goes to the one more like it;
* of its pieces, the leaf takes the run of consecutive ones inside one sentence (a
  sentence ends at a line break, or at ``.``, ``?``, ``!`` or ``…``, closing quotes and
  brackets after it allowed, followed by a space) that it is most like, whole; "the
  establishments" loses "the" to a leaf "establishments", "all right" stays whole
  for "alright";
* a span below the fuzzy threshold, or with a number that is not the leaf's number
  ("22" on "23", "twenty" on "22"), is not taken: with no span left, the leaf is
  unaligned.

>>> import numpy as np
>>> text = "we saw 22 of them"
>>> # "two" matched the "o" of "of" and "of" its "f": both are placed again
>>> start, end = np.array([0, 3, 7, 11, 13]), np.array([2, 6, 11, 12, 17])
>>> cls = np.array([0, 0, 2, 2, 0], dtype=np.int8)     # exact, exact, fuzzy, fuzzy, exact
>>> forms = ["we", "saw", "twentytwo", "of", "them"]
>>> eq_leaf, eq_pos = np.array([2, 3]), np.array([10, 11])
>>> settle_fuzzy(text, 0, forms.__getitem__, cls, start, end, np.ones(5), eq_leaf, eq_pos,
...              np.zeros(5, np.int64), np.array([0]), np.array([len(text)]))
2
>>> [text[a:b] if c != 4 else None for a, b, c in zip(start, end, cls)]
['we', 'saw', None, 'of', 'them']
"""
from __future__ import annotations

import re
from typing import Callable

import edlib
import numpy as np

from engine.align.normalise import normalise_form

#: Class codes shared with :mod:`engine.align.sequence`.
EXACT, NORMALISED, FUZZY, EVENT, UNALIGNED = range(5)
#: Share of a leaf's characters that must agree with its span (see ``sequence.FUZZY_MIN``).
FUZZY_MIN = 0.5
#: The most words of the text one leaf is tried on ("all right" for "alright" is two).
MAX_PIECES = 4
_WORD = re.compile(r"\w+(?:['\u2019.,]\w+)*")
_SENTENCE_END = re.compile(r"[.?!\u2026][\"'\u201d\u2019)\]]*(?=\s)|\n")
_NUMBER_SEP = re.compile(r"(?<=\d)[.,](?=\d)")
_DIGITS = re.compile(r"\d+")


def word_cuts(text: str, cls: np.ndarray, start: np.ndarray, end: np.ndarray, seg_of: np.ndarray) -> np.ndarray:
    """Aligned leaves that cut into a word of the text without a neighbouring leaf taking the rest.

    "do" + "n't" on "don't" cut the word between them and are fine; "he" on the letters of
    "where" (the leaves dropped "where", and "he" is said later) is not: such a leaf is
    placed again like a fuzzy one. A cut is a leaf edge between two word characters.

    >>> import numpy as np
    >>> cls, seg = np.zeros(3, np.int8), np.zeros(3, np.int64)
    >>> word_cuts("don't go", cls, np.array([0, 2, 6]), np.array([2, 5, 8]), seg).tolist()
    [False, False, False]
    >>> word_cuts("where he", cls[:1], np.array([3]), np.array([5]), seg[:1]).tolist()
    [True]
    """
    n = len(cls)
    placed = (cls == EXACT) | (cls == NORMALISED) | (cls == FUZZY)
    if not placed.any():
        return np.zeros(n, dtype=bool)
    codes = np.frombuffer(text.encode("utf-32-le"), dtype=np.uint32)
    present, inverse = np.unique(codes, return_inverse=True)
    is_word = np.array([chr(c).isalnum() or c == 95 for c in present.tolist()], dtype=bool)[inverse]
    is_word = np.concatenate([is_word, [False]])          # past the end: no word
    s = np.where(placed, start, 0)
    e = np.where(placed, end, 0)
    cut_left = placed & (s > 0) & is_word[s] & is_word[np.maximum(s - 1, 0)]
    cut_right = placed & (e > 0) & is_word[np.maximum(e - 1, 0)] & is_word[e]
    same_seg_prev = np.concatenate([[False], seg_of[1:] == seg_of[:-1]])
    same_seg_next = np.concatenate([seg_of[1:] == seg_of[:-1], [False]])
    prev_end = np.concatenate([[-1], np.where(placed, end, -2)[:-1]])
    next_start = np.concatenate([np.where(placed, start, -2)[1:], [-1]])
    left_ok = ~cut_left | (same_seg_prev & (prev_end == s))
    right_ok = ~cut_right | (same_seg_next & (next_start == e))
    return placed & ~(left_ok & right_ok)


def numbers_in(s: str) -> list[str]:
    """The numbers written in digits in ``s``, separators dropped ("1,000" -> "1000").

    >>> numbers_in("22"), numbers_in("1,000.5 km"), numbers_in("twenty")
    (['22'], ['10005'], [])
    """
    return _DIGITS.findall(_NUMBER_SEP.sub("", s))


def agreement(a: str, b: str) -> float:
    """Characters the best global alignment of ``a`` and ``b`` pairs equal, over the longer length.

    >>> agreement("thum", "them"), agreement("of", "of"), agreement("uh", "hundred")
    (0.75, 1.0, 0.14285714285714285)
    """
    if not a or not b:
        return 0.0
    symbols = {c: i for i, c in enumerate(sorted(set(a) | set(b)))}
    if len(symbols) > 256:                      # edlib's alphabet: such "words" are not words
        return 0.0
    res = edlib.align([symbols[c] for c in a], [symbols[c] for c in b], mode="NW", task="path")
    equal = sum(int(k) for k, op in re.findall(r"(\d+)([=XID])", res["cigar"] or "") if op == "=")
    return equal / max(len(a), len(b))


def _runs(mask: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Starts and ends (exclusive) of the runs of True in ``mask``."""
    edges = np.diff(np.concatenate([[0], mask.astype(np.int8), [0]]))
    return np.flatnonzero(edges == 1), np.flatnonzero(edges == -1)


def settle_fuzzy(text: str, t_lo: int, form_of: Callable[[int], str], cls: np.ndarray, start: np.ndarray,
                 end: np.ndarray, score: np.ndarray, eq_leaf: np.ndarray, eq_pos: np.ndarray,
                 seg_of: np.ndarray, lo: np.ndarray, hi: np.ndarray, leaves: np.ndarray | None = None) -> int:
    """Place the fuzzy leaves again by words; ``cls``, ``start``, ``end``, ``score`` change in place.

    ``text[t_lo:]`` holds every segment; ``form_of(i)`` is leaf ``i`` as written; ``eq_leaf``
    and ``eq_pos`` list, for the matching characters of fuzzy leaves, their leaf and their
    text offset; ``seg_of``, ``lo`` and ``hi`` give each leaf's segment and its text window.
    ``leaves``: the leaves to place (default: every fuzzy one); the others keep their place.
    Returns how many leaves changed place or class.
    """
    fuzzy = np.flatnonzero(cls == FUZZY) if leaves is None else np.asarray(leaves, dtype=np.int64)
    if not len(fuzzy):
        return 0
    t_hi = int(max(hi.max(), end.max()))
    window = text[t_lo:t_hi]
    n = len(window)
    word = np.zeros(n + 1, dtype=np.int64)
    spans = np.array([(m.start(), m.end()) for m in _WORD.finditer(window)], dtype=np.int64).reshape(-1, 2)
    np.add.at(word, spans[:, 0], 1)
    np.add.at(word, spans[:, 1], -1)
    owned = np.zeros(n + 1, dtype=np.int64)
    good = np.flatnonzero((cls == EXACT) | (cls == NORMALISED) | ((cls == FUZZY) & ~np.isin(np.arange(len(cls)), fuzzy)))
    np.add.at(owned, start[good] - t_lo, 1)
    np.add.at(owned, end[good] - t_lo, -1)
    piece_char = (np.cumsum(word)[:n] > 0) & (np.cumsum(owned)[:n] == 0)
    piece_char = _trim_joiners(window, piece_char)
    p_start, p_end = _runs(piece_char)
    piece_of = np.full(n, -1, dtype=np.int64)
    piece_of[piece_char] = np.repeat(np.arange(len(p_start)), p_end - p_start)
    ends = np.zeros(n + 1, dtype=np.int64)
    ends[[m.end() for m in _SENTENCE_END.finditer(window)]] = 1
    sentence_of_piece = np.cumsum(ends)[p_start] if len(p_start) else p_start
    # claims: (leaf, piece) -> matching characters in it
    keep = np.isin(eq_leaf, fuzzy)
    pieces = piece_of[eq_pos[keep] - t_lo]
    leaves = eq_leaf[keep][pieces >= 0]
    pieces = pieces[pieces >= 0]
    claims: dict[int, dict[int, int]] = {int(i): {} for i in fuzzy}
    for leaf, piece in zip(leaves.tolist(), pieces.tolist()):
        claims[leaf][piece] = claims[leaf].get(piece, 0) + 1
    owner: dict[int, int] = {}
    norm = {int(i): normalise_form(form_of(i)) for i in fuzzy}
    piece_norm = lambda p: normalise_form(window[p_start[p]:p_end[p]])  # noqa: E731
    for leaf in fuzzy.tolist():
        for piece, count in claims[leaf].items():
            rival = owner.get(piece)
            if rival is None or ((agreement(norm[leaf], piece_norm(piece)), count)
                                 > (agreement(norm[rival], piece_norm(piece)), claims[rival][piece])):
                owner[piece] = leaf
    # a leaf may also take the free piece just before or after its own, when no placed leaf
    # stands between: "a" that matched the "a" of "as" finds the "a" after it
    owned_before = np.concatenate([[0], np.cumsum(np.cumsum(owned)[:n] > 0)])
    free = lambda p, q: owned_before[p_start[q]] == owned_before[p_end[p]]  # noqa: E731
    taken: set[int] = set()
    changed = 0
    for leaf in fuzzy.tolist():
        mine = sorted(p for p in claims[leaf] if owner[p] == leaf)
        if mine:
            before, after = mine[0] - 1, mine[-1] + 1
            if before >= 0 and before not in owner and before not in taken and free(before, mine[0]):
                mine.insert(0, before)
            if after < len(p_start) and after not in owner and after not in taken and free(mine[-1], after):
                mine.append(after)
        seg = seg_of[leaf]
        new = (-1, -1, UNALIGNED, 0.0)
        best = -1.0
        chosen = (0, -1)
        for a_piece, b_piece in _runs_of_one_sentence(mine, sentence_of_piece):
            a = max(int(p_start[a_piece]) + t_lo, int(lo[seg]))
            b = min(int(p_end[b_piece]) + t_lo, int(hi[seg]))
            form = form_of(leaf)
            # "u.s." takes the point the word pattern leaves after "U.S"
            tails = (b, b + 1) if form and not form[-1].isalnum() and b < hi[seg] and text[b] == form[-1] else (b,)
            for b in tails if a < b else ():
                cls_, share = _judge(form, norm[leaf], text[a:b])
                if cls_ != UNALIGNED and share > best:
                    new, best, chosen = (a, b, cls_, share), share, (a_piece, b_piece)
        taken.update(range(chosen[0], chosen[1] + 1))
        if (new[0], new[1], new[2]) != (start[leaf], end[leaf], cls[leaf]):
            changed += 1
        start[leaf], end[leaf], cls[leaf], score[leaf] = new
    return changed


def _trim_joiners(window: str, piece_char: np.ndarray) -> np.ndarray:
    """Piece characters less the joiners (``'.,``) left at a piece's edge once an exact leaf
    took the word beside them: "John's" less an exact "John" is "s", not "'s"."""
    joiner = np.array([c in "'\u2019.," for c in window], dtype=bool)
    for _ in range(2):               # "--" and "'," at an edge: joiners come one or two together
        inside = np.concatenate([[False], piece_char, [False]])
        edge = ~inside[:-2] | ~inside[2:]
        piece_char = piece_char & ~(joiner & edge)
    return piece_char


def _runs_of_one_sentence(pieces: list[int], sentence_of_piece: np.ndarray) -> list[tuple[int, int]]:
    """Every run of consecutive claimed pieces in one sentence, as (first, last) piece, shortest first.

    A leaf claims one to three pieces as a rule; runs longer than :data:`MAX_PIECES` are not tried.
    """
    out = []
    for width in range(1, min(len(pieces), MAX_PIECES) + 1):
        for i in range(len(pieces) - width + 1):
            a, b = pieces[i], pieces[i + width - 1]
            if b - a == width - 1 and sentence_of_piece[a] == sentence_of_piece[b]:
                out.append((a, b))
    return out


def _judge(form: str, norm: str, span: str) -> tuple[int, float]:
    """Class and score of a leaf on a span of the text."""
    span_norm = normalise_form(span)
    if form == span:
        return EXACT, 1.0
    if norm == span_norm:
        return NORMALISED, 1.0
    if numbers_in(norm) != numbers_in(span_norm):
        return UNALIGNED, 0.0
    share = agreement(norm, span_norm)
    # placed by words, a leaf needs more than half its word: at exactly half, "four" would
    # take "or", "um" "em" and "and" "agenda"
    return (FUZZY, share) if share > FUZZY_MIN else (UNALIGNED, 0.0)
