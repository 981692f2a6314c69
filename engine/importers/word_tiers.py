"""Which tiers carry the words, and which speaker each tier belongs to.

The words tier is the bridge between text and time: its labels are aligned to the
document's text, and every other tier and text layer takes its other axis through it.
Forced aligners name their tiers as they please ("words", "word", "spoken", "Anna - words"),
so no name is hard-coded: ``--words-tier NAME`` names it, ``--words-tier '* - words'`` names
one tier per speaker (the ``*`` is the speaker, and the other tiers of that speaker, such as
"Anna - phones", become layer ``phones`` with ``speaker = "Anna"``), and without the option the
tier whose labels are found best in the text is taken, and the import says which.
"""
from __future__ import annotations

import difflib
import re
from dataclasses import dataclass

import pyarrow as pa
import pyarrow.compute as pc

from engine.errors import StrataError

#: below this share of its labels found among the text's words, no tier is taken as the words
MIN_COVERAGE = 0.5
_LAYER_NAME = re.compile(r"[A-Za-z_][A-Za-z0-9_\-]*")


def layer_name(tier: str) -> str:
    """A tier's name as a layer name a query can write: kept when it is one already, else
    lower-cased with every run of other characters made one "_" ("Speaker A" -> "speaker_a").

    >>> layer_name("phones"), layer_name("Speaker A"), layer_name("1st pass")
    ('phones', 'speaker_a', 't_1st_pass')
    """
    if _LAYER_NAME.fullmatch(tier):
        return tier
    name = re.sub(r"[^a-z0-9]+", "_", tier.lower()).strip("_") or "tier"
    return name if name[0].isalpha() else f"t_{name}"


@dataclass(frozen=True)
class SpeakerPattern:
    """``'* - words'``: the part before and after the speaker, and the words tier's own word."""
    before: str
    after: str

    @classmethod
    def parse(cls, text: str) -> "SpeakerPattern":
        if text.count("*") != 1:
            raise StrataError(f"--words-tier {text!r}: a pattern has one * where the speaker's name goes, "
                              "e.g. '* - words'")
        before, after = text.split("*")
        return cls(before, after)

    def speaker(self, tier: str) -> str | None:
        """The speaker of a words tier, or None when ``tier`` is not one."""
        if len(tier) > len(self.before) + len(self.after) and tier.startswith(self.before) \
                and tier.endswith(self.after):
            return tier[len(self.before):len(tier) - len(self.after)]
        return None

    def split(self, tier: str, speakers: list[str]) -> tuple[str, str] | None:
        """``(speaker, kind)`` of any tier named like the words tiers ("Anna - phones" ->
        ("Anna", "phones")): the text after the speaker, without the pattern's separator."""
        kind_word = re.search(r"[\w]+\W*$", self.after)
        separator = self.after[:kind_word.start()] if kind_word else self.after
        for who in sorted(speakers, key=len, reverse=True):
            head = self.before + who + separator
            if tier.startswith(head) and len(tier) > len(head):
                return who, tier[len(head):]
        return None


def speaker_tiers(tier_names: list[str], pattern: SpeakerPattern) -> dict[str, tuple[str, str]]:
    """For every tier that belongs to a speaker: ``tier -> (speaker, kind)``, the words tiers'
    kind being the pattern's own word (``'* - words'`` -> "words")."""
    speakers = [s for s in (pattern.speaker(t) for t in tier_names) if s is not None]
    out = {}
    for tier in tier_names:
        who = pattern.speaker(tier)
        if who is not None:
            kind = re.sub(r"^\W+|\W+$", "", pattern.after) or re.sub(r"^\W+|\W+$", "", pattern.before) or "words"
            out[tier] = (who, kind)
        else:
            split = pattern.split(tier, speakers)
            if split is not None:
                out[tier] = split
    return out


def coverage(labels: pa.Array, text_words: pa.Array) -> tuple[float, int]:
    """The share of the non-empty labels that are words of the text (case-blind, punctuation
    around them ignored), and how many they are: a cheap stand-in for a whole alignment, good
    enough to tell words from phones (few found) and from pauses or events (few labels)."""
    cleaned = pc.utf8_lower(pc.replace_substring_regex(labels, r"^\W+|\W+$", ""))
    cleaned = cleaned.filter(pc.not_equal(cleaned, ""))
    if not len(cleaned):
        return 0.0, 0
    found = pc.sum(pc.cast(pc.is_in(cleaned, value_set=text_words), pa.int64())).as_py() or 0
    return found / len(cleaned), found


def text_words(texts: list[str]) -> pa.Array:
    words = set()
    for text in texts:
        words.update(re.findall(r"\w+", text.lower()))
    return pa.array(sorted(words), pa.string())


def choose(choice: str | None, tier_names: list[str], tier_labels: dict[str, pa.Array], texts: list[str],
           bridge_stored: bool) -> tuple[set[str], str | None]:
    """The words tiers among ``tier_names`` and a note saying how they were chosen.

    ``choice``: the ``--words-tier`` value (a name or a pattern with ``*``), or None to take the
    tier whose labels are found best in ``texts``.  ``bridge_stored``: the corpus has a words
    layer from an earlier import, so a file of phones or events alone needs none."""
    if choice is not None and "*" in choice:
        pattern = SpeakerPattern.parse(choice)
        found = {t for t in tier_names if pattern.speaker(t) is not None}
        if not found:
            raise StrataError(f"--words-tier {choice!r} matches none of the tiers: {', '.join(tier_names)}")
        return found, None
    if choice is not None:
        if choice not in tier_names:
            near = difflib.get_close_matches(choice, tier_names, n=3)
            raise StrataError(f"--words-tier {choice!r}: there is no such tier; the tiers are "
                              f"{', '.join(tier_names)}", hint=f"did you mean: {', '.join(near)}?" if near else None)
        return {choice}, None
    words = text_words(texts)
    scores = {t: coverage(tier_labels[t], words) for t in tier_names}
    # among the tiers whose labels are mostly words of the text, the one with the most of them
    likely = [t for t in tier_names if scores[t][0] >= MIN_COVERAGE]
    best = max(likely, key=lambda t: (scores[t][1], -tier_names.index(t)), default=None)
    if best is None:
        if bridge_stored:
            return set(), None
        shown = ", ".join(f"{t} {100 * scores[t][0]:.0f} %" for t in tier_names)
        raise StrataError(f"no tier's labels are the words of the text (labels found in the text: {shown}); "
                          "strata needs a words tier to place the tiers in the text",
                          hint="name it with --words-tier NAME (or '* - words' for one tier per speaker)")
    return {best}, (f"took tier {best!r} as the words: {scores[best][1]} labels, {100 * scores[best][0]:.1f} % of "
                    "them words of the text")
