"""Allen's thirteen interval relations in plain Python.

Source: J. F. Allen (1983), "Maintaining knowledge about temporal intervals",
Communications of the ACM 26(11), 832-843.  For proper intervals (start < end) exactly
one relation holds between any two intervals.  The query language uses the same names
(with ``overlaps`` and ``contains`` written ``... in time`` to tell them from the text
relations); this module is the reference the compiled SQL is tested against.
"""
from __future__ import annotations

Interval = tuple[float, float]

RELATIONS = ("before", "after", "meets", "met by", "overlaps", "overlapped by", "starts", "started by",
             "during", "contains", "finishes", "finished by", "equals")

INVERSE = {
    "before": "after", "after": "before", "meets": "met by", "met by": "meets",
    "overlaps": "overlapped by", "overlapped by": "overlaps", "starts": "started by",
    "started by": "starts", "during": "contains", "contains": "during",
    "finishes": "finished by", "finished by": "finishes", "equals": "equals",
}


#: Beside Allen's strict relations, two of our own that a phonetician asks for, each a union
#: of Allen's relations (so the algebra above is their reference):
#: ``inside ... in time``: a lies within b, edges may coincide (a word's first and last phones)
INSIDE_IN_TIME = frozenset({"during", "starts", "finishes", "equals"})
#: ``shares time with``: some stretch of time belongs to both (not merely touching)
SHARES_TIME = frozenset(RELATIONS) - {"before", "after", "meets", "met by"}


def inside_in_time(a: Interval, b: Interval) -> bool:
    """a within b, edges may coincide: ``b.start <= a.start and a.end <= b.end``.

    >>> inside_in_time((0, 1), (0, 3)), inside_in_time((1, 3), (0, 3)), inside_in_time((0, 4), (0, 3))
    (True, True, False)
    """
    return b[0] <= a[0] and a[1] <= b[1]


def shares_time(a: Interval, b: Interval) -> bool:
    """Each starts before the other ends: ``a.start < b.end and b.start < a.end``.

    >>> shares_time((0, 2), (1, 3)), shares_time((0, 1), (1, 2)), shares_time((1, 1), (0, 2))
    (True, False, True)
    """
    return a[0] < b[1] and b[0] < a[1]


def holds(name: str, a: Interval, b: Interval) -> bool:
    """Whether relation ``name`` holds from ``a`` to ``b`` (Allen's definitions, end points compared)."""
    (as_, ae), (bs, be) = a, b
    tests = {
        "before": ae < bs,
        "after": be < as_,
        "meets": ae == bs,
        "met by": be == as_,
        "overlaps": as_ < bs < ae < be,
        "overlapped by": bs < as_ < be < ae,
        "starts": as_ == bs and ae < be,
        "started by": as_ == bs and be < ae,
        "during": bs < as_ and ae < be,
        "contains": as_ < bs and be < ae,
        "finishes": ae == be and bs < as_,
        "finished by": ae == be and as_ < bs,
        "equals": as_ == bs and ae == be,
    }
    return tests[name]


def relation(a: Interval, b: Interval) -> str:
    """The one relation between two proper intervals; ValueError for an empty or reversed one."""
    for iv in (a, b):
        if not iv[0] < iv[1]:
            raise ValueError(f"not a proper interval: {iv!r} (start must be before end)")
    found = [name for name in RELATIONS if holds(name, a, b)]
    assert len(found) == 1, (a, b, found)
    return found[0]
