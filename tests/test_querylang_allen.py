"""Allen's interval algebra: the thirteen relations are exhaustive, exclusive, and pair up as inverses.

Reference: J. F. Allen (1983), "Maintaining knowledge about temporal intervals", CACM 26(11),
832-843 — the definitions (Figure 2 of the paper) and the inverse pairs (Table 1).
"""
from __future__ import annotations

import pytest
from hypothesis import given, strategies as st

from querylang.allen import INSIDE_IN_TIME, INVERSE, RELATIONS, SHARES_TIME, holds, inside_in_time, relation, shares_time

# small integer end points make equal end points (meets, starts, ...) frequent
point = st.integers(min_value=0, max_value=8)


@st.composite
def interval(draw):
    a = draw(point)
    b = draw(point.filter(lambda x: x != a))
    return (min(a, b), max(a, b))


@given(interval(), interval())
def test_exactly_one_relation_holds(a, b):
    assert sum(holds(name, a, b) for name in RELATIONS) == 1


@given(interval(), interval())
def test_inverse_holds_with_arguments_swapped(a, b):
    assert relation(b, a) == INVERSE[relation(a, b)]


def test_thirteen_relations_seven_inverse_pairs():
    # Allen 1983: 13 relations, "equals" is its own inverse, the others form 6 pairs.
    assert len(RELATIONS) == 13
    assert all(INVERSE[INVERSE[r]] == r for r in RELATIONS)
    assert [r for r in RELATIONS if INVERSE[r] == r] == ["equals"]


# One example of each relation, drawn from the definitions in Allen (1983), Figure 2.
EXAMPLES = {
    "before": ((0, 1), (2, 3)), "meets": ((0, 1), (1, 2)), "overlaps": ((0, 2), (1, 3)),
    "starts": ((0, 1), (0, 2)), "during": ((1, 2), (0, 3)), "finishes": ((1, 2), (0, 2)),
    "equals": ((0, 1), (0, 1)),
}


@pytest.mark.parametrize("name", sorted(EXAMPLES))
def test_worked_examples(name):
    a, b = EXAMPLES[name]
    assert relation(a, b) == name
    assert relation(b, a) == INVERSE[name]


def test_improper_interval_refused():
    with pytest.raises(ValueError):
        relation((1, 1), (0, 2))


# Our own two time relations are unions of Allen's (querylang/allen.py): checked on every pair
# of small intervals, where shared end points are frequent.
@given(interval(), interval())
def test_inside_in_time_is_during_starts_finishes_or_equals(a, b):
    assert inside_in_time(a, b) == (relation(a, b) in INSIDE_IN_TIME)


@given(interval(), interval())
def test_shares_time_is_every_relation_but_before_after_meets_met_by(a, b):
    assert shares_time(a, b) == (relation(a, b) in SHARES_TIME) == shares_time(b, a)
