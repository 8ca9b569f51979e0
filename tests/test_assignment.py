"""The assignment solver of small matrices against enumeration and scipy's solver.

References: every permutation enumerated (itertools.permutations) for small ``n``;
``scipy.optimize.linear_sum_assignment`` (Crouse, IEEE Trans. Aerosp. Electron. Syst. 52 (2016),
1679–1696) for larger ones. Ties may be broken differently: the optimal *value* is compared.
"""

from __future__ import annotations

import math
from itertools import permutations

import numpy as np
import pytest
from cyclecheck.algebra.assignment import (
    NUMPY_MAX_SIZE,
    best_assignment,
    shortest_augmenting_path,
)
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays
from scipy.optimize import linear_sum_assignment


def total(cost: np.ndarray, cols: np.ndarray) -> float:
    return math.fsum(cost[np.arange(cost.shape[0]), cols].tolist())


def is_permutation(cols: np.ndarray, n: int) -> bool:
    return cols.dtype == np.int64 and sorted(cols.tolist()) == list(range(n))


@st.composite
def square(draw, max_n: int, values=None):  # type: ignore[no-untyped-def]
    n = draw(st.integers(0, max_n))
    values = values or st.one_of(
        st.integers(-20, 20).map(float),  # many ties
        st.floats(-1e6, 1e6, allow_nan=False, allow_infinity=False),
    )
    return draw(arrays(np.float64, (n, n), elements=values))


def enumerated_best(matrix: np.ndarray, pick) -> float:  # type: ignore[no-untyped-def]
    """The best total over every permutation (itertools.permutations)."""
    n = matrix.shape[0]
    return pick((math.fsum(matrix[i, s[i]] for i in range(n)) for s in permutations(range(n))),
                default=0.0)


@settings(max_examples=300, deadline=None)
@given(square(max_n=7), st.sampled_from(["least cost", "largest weight"]))
def test_solvers_match_enumeration(matrix, goal):
    """shortest_augmenting_path minimizes, best_assignment maximizes: both reach the best total
    of all permutations."""
    n = matrix.shape[0]
    if goal == "least cost":
        cols, best = shortest_augmenting_path(matrix), enumerated_best(matrix, min)
    else:
        cols, best = best_assignment(matrix), enumerated_best(matrix, max)
    assert is_permutation(cols, n)
    scale = float(np.abs(matrix).max(initial=1.0))
    assert total(matrix, cols) == pytest.approx(best, abs=1e-9 * n * scale)


@pytest.mark.parametrize("n", [8, 15, 31, 32, 33, 60, 120])
@pytest.mark.parametrize("kind", ["normal", "integers", "wide"])
def test_matches_scipy(n, kind):
    rng = np.random.default_rng(n * 7 + len(kind))
    for _ in range(5):
        if kind == "normal":
            weight = rng.standard_normal((n, n)) * 10
        elif kind == "integers":  # ties everywhere
            weight = rng.integers(-3, 4, (n, n)).astype(float)
        else:  # magnitudes from 1e-3 to 1e6, as holds and durations in seconds can be
            weight = rng.choice([-1.0, 1.0], (n, n)) * 10.0 ** rng.uniform(-3, 6, (n, n))
        _, ref = linear_sum_assignment(weight, maximize=True)
        scale = float(np.abs(weight).max())
        for cols in (best_assignment(weight), shortest_augmenting_path(-weight)):
            assert is_permutation(cols, n)
            assert total(weight, cols) == pytest.approx(total(weight, ref), abs=1e-11 * n * scale)


def test_numpy_solver_below_the_threshold_only():
    """Above NUMPY_MAX_SIZE rows the compiled solver is used: the same optimal value."""
    rng = np.random.default_rng(5)
    for n in (NUMPY_MAX_SIZE, NUMPY_MAX_SIZE + 1):
        weight = rng.uniform(0, 100, (n, n))
        _, ref = linear_sum_assignment(weight, maximize=True)
        assert total(weight, best_assignment(weight)) == pytest.approx(total(weight, ref),
                                                                        rel=1e-12)


def test_hand_worked_example():
    """3 × 3 by hand: rows take columns 2, 0, 1 for 9 + 8 + 7 = 24 (every other permutation
    totals at most 19)."""
    weight = np.array([[1.0, 2.0, 9.0], [8.0, 1.0, 3.0], [2.0, 7.0, 1.0]])
    assert best_assignment(weight).tolist() == [2, 0, 1]
    assert shortest_augmenting_path(-weight).tolist() == [2, 0, 1]
