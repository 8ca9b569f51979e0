"""Tests of :mod:`cyclecheck.algebra.charpoly`: tropical permanent, χ(z), essential terms, corners.

Every fast function is checked against a slow independent twin: the permanent against
``itertools.permutations`` and against scipy's own handling of forbidden entries; χ(z) against
the poly-cycle coefficients; the coefficients against disjoint simple cycles from networkx; the
largest corner against the maximum cycle mean over networkx's simple cycles and Karp's formula.
"""

from __future__ import annotations

import doctest
import math
from itertools import pairwise, permutations

import cyclecheck.algebra.charpoly as charpoly
import networkx as nx
import numpy as np
import pytest
from cyclecheck.algebra.charpoly import (
    EPS,
    MAX_DENSE_SIZE,
    MAX_ENUMERATION_SIZE,
    characteristic_value,
    charpoly_or_none,
    essential_terms,
    poly_cycle_coefficients,
    tropical_permanent,
)
from cyclecheck.algebra.exceptions import InvalidArray, MaxPlusError
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.optimize import linear_sum_assignment

INF = math.inf
# Hypothesis' deadline is a timing check: the project has no timed tests.
PROPERTY = settings(deadline=None, max_examples=80)


# ----------------------------------------------------------------------------- strategies


@st.composite
def maxplus_matrices(
    draw: st.DrawFn, min_n: int = 1, max_n: int = 6, low: int = -6, high: int = 6
) -> np.ndarray:
    """Square matrices of small integers (exact float sums) with a random share of ε entries.

    The narrow range makes ties between permutations and between terms frequent, which is where
    a parametric search goes wrong first.
    """
    n = draw(st.integers(min_n, max_n), label="n")
    eps_share = draw(st.integers(0, 4), label="ε share in fifths")
    cells = draw(
        st.lists(
            st.tuples(st.integers(0, 4), st.integers(low, high)), min_size=n * n, max_size=n * n
        )
    )
    values = [EPS if e < eps_share else float(v) for e, v in cells]
    return np.array(values, dtype=np.float64).reshape(n, n)


@st.composite
def float_matrices(draw: st.DrawFn, max_n: int = 5) -> np.ndarray:
    """Square matrices of general floats with ε entries (no exact ties)."""
    n = draw(st.integers(1, max_n), label="n")
    entry = st.one_of(
        st.just(EPS),
        st.floats(-50.0, 50.0, allow_nan=False, allow_infinity=False, allow_subnormal=False),
    )
    cells = draw(st.lists(entry, min_size=n * n, max_size=n * n))
    return np.array(cells, dtype=np.float64).reshape(n, n)


points = st.one_of(
    st.integers(-60, 60).map(lambda v: v / 4), st.floats(-40.0, 40.0, allow_nan=False)
)


# ----------------------------------------------------------------------------- slow twins


def brute_permanent(A: np.ndarray) -> float:
    """max over σ of Σ a_iσ(i), every permutation enumerated (itertools.permutations)."""
    n = A.shape[0]
    return max(
        (math.fsum(A[i, s[i]] for i in range(n)) for s in permutations(range(n))), default=0.0
    )


def scipy_permanent(A: np.ndarray) -> float:
    """scipy's linear_sum_assignment with ε left in place: scipy treats it as forbidden."""
    try:
        rows, cols = linear_sum_assignment(A, maximize=True)
    except ValueError as exc:  # scipy: "cost matrix is infeasible"
        assert "infeasible" in str(exc)
        return EPS
    return math.fsum(A[rows, cols].tolist())


def graph_of(A: np.ndarray) -> nx.DiGraph:
    """The precedence graph: an arc j -> i of weight a_ij for each finite entry."""
    G = nx.DiGraph()
    G.add_nodes_from(range(A.shape[0]))
    for i, j in zip(*np.nonzero(np.isfinite(A)), strict=True):
        G.add_edge(int(j), int(i), weight=float(A[i, j]))
    return G


def simple_cycles(A: np.ndarray) -> list[tuple[frozenset[int], float, int]]:
    """(nodes, weight, length) of every simple cycle, self-loops included (networkx)."""
    G = graph_of(A)
    out = []
    for cyc in nx.simple_cycles(G):
        w = math.fsum(G[cyc[t]][cyc[(t + 1) % len(cyc)]]["weight"] for t in range(len(cyc)))
        out.append((frozenset(cyc), w, len(cyc)))
    return out


def max_cycle_mean_networkx(A: np.ndarray) -> float:
    """Maximum over simple cycles of weight / length; ε for an acyclic graph."""
    return max((w / length for _, w, length in simple_cycles(A)), default=EPS)


def max_cycle_mean_karp(A: np.ndarray) -> float:
    """Karp (1978), "A characterization of the minimum cycle mean in a digraph", Discrete Math.
    23(3), 309–311, in its maximum form, with walks allowed to start anywhere (D_0 = 0: a
    super-source joined to every node by arcs of weight 0)."""
    n = A.shape[0]
    D = np.full((n + 1, n), EPS)
    D[0] = 0.0
    for k in range(1, n + 1):
        D[k] = np.max(A + D[k - 1][None, :], axis=1)
    best = EPS
    for v in range(n):
        if D[n, v] == EPS:
            continue
        ratios = [(D[n, v] - D[k, v]) / (n - k) for k in range(n) if D[k, v] > EPS]
        best = max(best, min(ratios))
    return best


def disjoint_cycle_coefficients(A: np.ndarray) -> np.ndarray:
    """δ_k as the best set of pairwise disjoint simple cycles covering n - k nodes (networkx)."""
    n = A.shape[0]
    cycles = simple_cycles(A)
    delta = np.full(n + 1, EPS)

    def extend(start: int, used: frozenset[int], weight: float) -> None:
        k = n - len(used)
        delta[k] = max(delta[k], weight)
        for c in range(start, len(cycles)):
            nodes, w, _ = cycles[c]
            if not nodes & used:
                extend(c + 1, used | nodes, weight + w)

    extend(0, frozenset(), 0.0)
    return delta


def upper_hull(delta: np.ndarray) -> list[int]:
    """Degrees k whose points (k, δ_k) are vertices of the upper concave hull (monotone chain)."""
    pts = [(k, float(d)) for k, d in enumerate(delta) if d > EPS]
    hull: list[tuple[int, float]] = []
    for p in pts:
        while len(hull) >= 2:
            (x1, y1), (x2, y2) = hull[-2], hull[-1]
            # drop the middle point unless it lies strictly above the chord
            if (y2 - y1) * (p[0] - x1) <= (p[1] - y1) * (x2 - x1):
                hull.pop()
            else:
                break
        hull.append(p)
    return [k for k, _ in hull]


def chi_from_coefficients(delta: np.ndarray, z: float) -> float:
    """max over k of k·z + δ_k (the polynomial read term by term)."""
    return max(d if k == 0 else k * z + d for k, d in enumerate(delta))


# ----------------------------------------------------------------------------- permanent


@PROPERTY
@given(maxplus_matrices(max_n=7))
def test_permanent_matches_scipy_and_brute_force(A):
    """The permanent is the optimal assignment (Burkard & Butkovič 2003, Math. Programming B 98,
    §2): our ε handling agrees with scipy's forbidden entries and with all n! permutations."""
    got = tropical_permanent(A)
    assert got == brute_permanent(A)
    assert got == scipy_permanent(A)


@PROPERTY
@given(float_matrices(max_n=6))
def test_permanent_of_float_matrices(A):
    """Same check on general floats (Burkard & Butkovič 2003): equal up to rounding."""
    want = brute_permanent(A)
    got = tropical_permanent(A)
    assert (got == want == EPS) or math.isclose(got, want, rel_tol=1e-12, abs_tol=1e-9)


@PROPERTY
@given(maxplus_matrices(max_n=6), st.randoms(use_true_random=False))
def test_permanent_ignores_row_and_column_order(A, rnd):
    """per(P A Q) = per(A) for permutation matrices P, Q: by the definition of the permanent.
    Shuffled labels rule out accidentally-correct behaviour."""
    n = A.shape[0]
    rows, cols = list(range(n)), list(range(n))
    rnd.shuffle(rows)
    rnd.shuffle(cols)
    assert tropical_permanent(A[np.ix_(rows, cols)]) == tropical_permanent(A)


def test_permanent_edge_cases():
    """Empty product = 0 (unit of ⊗); 1×1 is the entry; a row of ε forbids every permutation
    (definition of the permanent, Cuninghame-Green 1983)."""
    assert tropical_permanent(np.zeros((0, 0))) == 0.0
    assert tropical_permanent([[-2.5]]) == -2.5
    assert tropical_permanent([[EPS]]) == EPS
    assert tropical_permanent([[1.0, 2.0, 3.0], [EPS, EPS, EPS], [4.0, 5.0, 6.0]]) == EPS
    # finite entries everywhere except a pattern that leaves exactly one finite permutation
    A = np.full((4, 4), EPS)
    A[[0, 1, 2, 3], [2, 0, 3, 1]] = [1.0, -7.0, 2.0, 0.5]
    A[0, 0] = 100.0  # tempting, but row 0 -> column 0 leaves column 2 without a row
    assert tropical_permanent(A) == brute_permanent(A) == -3.5


# ----------------------------------------------------------------------------- χ(z)


@PROPERTY
@given(maxplus_matrices(max_n=6), st.lists(points, min_size=1, max_size=8))
def test_characteristic_value_matches_poly_cycles(A, zs):
    """χ(z) = per(A ⊕ zI) = max_k (k z + δ_k) with δ_k the best poly-cycle on n - k nodes
    (Burkard & Butkovič 2003, Discrete Appl. Math. 130, §1)."""
    delta = poly_cycle_coefficients(A)
    cp = essential_terms(A)
    for z in zs:
        want = chi_from_coefficients(delta, z)
        assert math.isclose(characteristic_value(A, z), want, rel_tol=1e-12, abs_tol=1e-9)
        assert math.isclose(cp(z), want, rel_tol=1e-12, abs_tol=1e-9)


@PROPERTY
@given(maxplus_matrices(max_n=5))
def test_poly_cycle_coefficients_match_disjoint_simple_cycles(A):
    """δ_k is the best weight of disjoint circuits covering n - k nodes (Cuninghame-Green 1983;
    Burkard & Butkovič 2003): principal permanents agree with networkx cycle packings."""
    assert np.array_equal(poly_cycle_coefficients(A), disjoint_cycle_coefficients(A))


@PROPERTY
@given(
    st.lists(st.one_of(st.just(EPS), st.integers(-9, 9).map(float)), min_size=4, max_size=4),
    points,
)
def test_two_by_two_closed_form(abcd, z):
    """Cuninghame-Green (1983), J. Math. Anal. Appl. 95: for [[a, b], [c, d]],
    χ(z) = z² ⊕ (a ⊕ d) z ⊕ (a ⊗ d ⊕ b ⊗ c)."""
    a, b, c, d = abcd
    want = max(2 * z, max(a, d) + z, max(a + d, b + c))
    A = np.array([[a, b], [c, d]])
    assert characteristic_value(A, z) == pytest.approx(want, rel=1e-12, abs=1e-12)
    assert essential_terms(A)(z) == pytest.approx(want, rel=1e-12, abs=1e-12)


def test_characteristic_value_at_infinities():
    """χ(ε) = per(A) and χ(+∞) = +∞ for n > 0; χ = 0 for n = 0 (definition, Akian, Bapat &
    Gaubert 2014, Handbook of Linear Algebra ch. 35)."""
    A = np.array([[3.0, 7.0], [2.0, 4.0]])
    assert characteristic_value(A, -INF) == 9.0
    assert characteristic_value(A, INF) == INF
    assert characteristic_value(np.zeros((0, 0)), 3.0) == 0.0
    assert essential_terms(A)(-INF) == 9.0
    assert essential_terms(A)(INF) == INF


def test_charpoly_evaluates_arrays():
    """CharPoly(z) works on arrays like the pointwise maximum of its terms
    (Cuninghame-Green 1983, worked 2×2 form)."""
    cp = essential_terms([[3.0, 7.0], [2.0, 4.0]])
    zs = np.array([[0.0, 4.5], [5.0, -INF]])
    want = np.array([[9.0, 9.0], [10.0, 9.0]])
    assert np.array_equal(cp(zs), want)


# ----------------------------------------------------------------------------- essential terms


@pytest.mark.parametrize(
    ("A", "corner", "permanent", "delta_1"),
    [([[3.0, 7.0], [2.0, 4.0]], 4.5, 9.0, 4.0), ([[2.0, 5.0], [3.0, 3.0]], 4.0, 8.0, 3.0)],
)
def test_heidergott_olsder_van_der_woude_examples(A, corner, permanent, delta_1):
    """Heidergott, Olsder & van der Woude (2006), Max Plus at Work, worked 2×2 examples, from
    memory: eigenvalues 4.5 and 4. The linear term is inessential in both, so the eigenvalue is
    a double corner of χ(z) = max(2z, per A)."""
    cp = essential_terms(A)
    assert cp.corners == (corner,)
    assert cp.multiplicities == (2,)
    assert cp.largest_corner == corner
    assert cp.degrees == (0, 2)
    assert cp.coefficients == (permanent, 0.0)
    assert cp.permanent == permanent
    assert poly_cycle_coefficients(A).tolist() == [permanent, delta_1, 0.0]


@PROPERTY
@given(maxplus_matrices(max_n=6))
def test_essential_terms_are_the_hull_of_all_coefficients(A):
    """A term is essential iff (k, δ_k) is a vertex of the upper hull of the coefficients
    (Burkard & Butkovič 2003, Discrete Appl. Math. 130, §2); the hull is computed here from the
    enumerated coefficients, independently of the parametric search."""
    delta = poly_cycle_coefficients(A)
    cp = essential_terms(A)
    degrees = upper_hull(delta)
    assert list(cp.degrees) == degrees
    assert list(cp.coefficients) == [delta[k] for k in degrees]


@PROPERTY
@given(maxplus_matrices(max_n=6))
def test_largest_corner_is_maximum_cycle_mean(A):
    """Akian, Bapat & Gaubert (2014), Handbook of Linear Algebra ch. 35: the greatest root of
    per(A ⊕ zI) is the maximum cycle mean; here over networkx's simple cycles (ε if none)."""
    want = max_cycle_mean_networkx(A)
    got = essential_terms(A).largest_corner
    assert (got == want == EPS) or math.isclose(got, want, rel_tol=1e-12)


@PROPERTY
@given(float_matrices(max_n=5))
def test_float_matrices_against_enumeration(A):
    """General floats: χ from the essential terms equals the enumerated polynomial at its own
    corners and between them, and the largest corner is the maximum cycle mean (Akian, Bapat &
    Gaubert 2014, ch. 35)."""
    delta = poly_cycle_coefficients(A)
    cp = essential_terms(A)
    finite = [r for r in cp.corners if r > EPS]
    zs = finite + [r + 1.0 for r in finite] + [r - 1.0 for r in finite] + [0.0]
    for z in zs:
        assert math.isclose(cp(z), chi_from_coefficients(delta, z), rel_tol=1e-9, abs_tol=1e-9)
    want = max_cycle_mean_networkx(A)
    assert (cp.largest_corner == want == EPS) or math.isclose(
        cp.largest_corner, want, rel_tol=1e-9, abs_tol=1e-9
    )


def slope(A: np.ndarray, z: float, h: float) -> int:
    """Right slope of χ at z, from two assignment evaluations (rounded: slopes are integers)."""
    return round((characteristic_value(A, z + h) - characteristic_value(A, z)) / h)


@PROPERTY
@given(maxplus_matrices(max_n=6))
def test_corners_are_the_changes_of_slope(A):
    """Akian, Bapat & Gaubert (2014), ch. 35: the multiplicity of a root is the change of slope
    of χ there, and χ is linear between roots. Slopes are measured by finite differences of
    per(A ⊕ zI), independently of the search. Integer entries put distinct corners at least
    1/(n(n-1)) apart, far more than the step h."""
    cp = essential_terms(A)
    n = A.shape[0]
    h = 1e-3
    assert sum(cp.multiplicities) == n
    assert list(cp.corners) == sorted(cp.corners, reverse=True)
    assert len(set(cp.corners)) == len(cp.corners)
    finite = [(r, m) for r, m in zip(cp.corners, cp.multiplicities, strict=True) if r > EPS]
    for r, m in finite:
        assert slope(A, r, h) - slope(A, r - h, h) == m
    # between and beyond the corners the slope is the degree of the essential term in force
    bounds = [r for r, _ in reversed(finite)]
    probes = [bounds[0] - 7.0] if bounds else [0.0]
    probes += [(u + v) / 2 for u, v in pairwise(bounds)]
    probes += [bounds[-1] + 7.0] if bounds else []
    assert [slope(A, z, h) for z in probes] == list(cp.degrees)
    # ε is a root of multiplicity k0 exactly when the permanent is ε
    assert (cp.corners[-1] == EPS) == (tropical_permanent(A) == EPS)
    if tropical_permanent(A) > EPS:
        assert sum(m for _, m in finite) == n


@PROPERTY
@given(maxplus_matrices(max_n=6), st.lists(points, min_size=1, max_size=6))
def test_tropical_factorisation(A, zs):
    """Every monic max-polynomial function factors into its roots:
    χ(z) = Σ_r mult(r)·max(z, r) (Akian, Bapat & Gaubert 2014, ch. 35, from memory)."""
    cp = essential_terms(A)
    for z in zs:
        product = math.fsum(
            m * max(z, r) for r, m in zip(cp.corners, cp.multiplicities, strict=True)
        )
        assert math.isclose(product, characteristic_value(A, z), rel_tol=1e-12, abs_tol=1e-9)


@PROPERTY
@given(maxplus_matrices(min_n=1, max_n=12), st.randoms(use_true_random=False))
def test_triangular_roots_are_the_diagonal(A, rnd):
    """For a triangular matrix only the identity permutation of A ⊕ zI is finite, so
    χ(z) = Σ_i max(z, a_ii) = ⊗_i (z ⊕ a_ii): the roots are the diagonal entries, counted with
    repetition, ε included (Cuninghame-Green 1983, definition of χ). Labels are shuffled by a
    similarity so that the triangle is hidden."""
    n = A.shape[0]
    T = np.tril(A)
    T[np.triu_indices(n, 1)] = EPS
    order = list(range(n))
    rnd.shuffle(order)
    cp = essential_terms(T[np.ix_(order, order)])
    values, counts = np.unique(np.diag(T), return_counts=True)
    assert cp.corners == tuple(float(v) for v in values[::-1])
    assert cp.multiplicities == tuple(int(c) for c in counts[::-1])


@PROPERTY
@given(maxplus_matrices(max_n=6), st.randoms(use_true_random=False))
def test_similarity_invariance(A, rnd):
    """χ(P A Pᵀ) = χ(A) for a permutation P: relabelling nodes changes no poly-cycle
    (definition of δ_k, Burkard & Butkovič 2003). Labels shuffled."""
    order = list(range(A.shape[0]))
    rnd.shuffle(order)
    assert essential_terms(A[np.ix_(order, order)]) == essential_terms(A)


@PROPERTY
@given(maxplus_matrices(max_n=7, low=-3, high=3))
def test_cost_is_linear_in_assignments(A):
    """The parametric search finds a new essential term or a corner with each assignment
    problem: at most 2n + 1 of them (the O(n) claim of the docstring; Burkard & Butkovič 2003
    give a polynomial bound of their own)."""
    assert essential_terms(A).assignments <= 2 * A.shape[0] + 1


@pytest.mark.parametrize("child", range(6))
def test_larger_matrices_against_karp(child):
    """n = 12..40 with ε entries: largest corner = Karp (1978) maximum cycle mean, multiplicities
    add up to n, and χ at the corners equals per(A ⊕ zI) (Akian, Bapat & Gaubert 2014, ch. 35)."""
    rng = np.random.default_rng(np.random.SeedSequence(20261201).spawn(6)[child])
    n = int(rng.integers(12, 41))
    A = rng.integers(-20, 21, size=(n, n)).astype(np.float64)
    A[rng.random((n, n)) < rng.uniform(0.2, 0.9)] = EPS
    cp = essential_terms(A)
    want = max_cycle_mean_karp(A)
    assert (cp.largest_corner == want == EPS) or math.isclose(
        cp.largest_corner, want, rel_tol=1e-12
    )
    assert sum(cp.multiplicities) == n
    assert cp.permanent == tropical_permanent(A)
    for r in cp.corners:
        if r > EPS:
            assert math.isclose(cp(r), characteristic_value(A, r), rel_tol=1e-12)


def test_degenerate_matrices():
    """No circuit: χ(z) = z^n, ε a root of multiplicity n; n = 1: χ(z) = max(z, a); all zeros:
    every δ_k = 0 and only δ_0, δ_n are essential (Cuninghame-Green 1983, definitions)."""
    acyclic = np.array([[EPS, EPS, EPS], [1.0, EPS, EPS], [2.0, 3.0, EPS]])
    cp = essential_terms(acyclic)
    assert (cp.degrees, cp.corners, cp.multiplicities) == ((3,), (EPS,), (3,))
    assert cp.largest_corner == EPS == max_cycle_mean_networkx(acyclic)
    assert essential_terms(np.full((2, 2), EPS)).corners == (EPS,)
    assert essential_terms([[-1.5]]).corners == (-1.5,)
    cp = essential_terms(np.zeros((4, 4)))
    assert (cp.degrees, cp.corners, cp.multiplicities) == ((0, 4), (0.0,), (4,))
    empty = essential_terms(np.zeros((0, 0)))
    assert (empty.corners, empty.largest_corner, empty(5.0)) == ((), EPS, 0.0)


def test_to_dict_is_json_ready():
    """ε corners become None so that the result document stays valid JSON (RFC 8259 has no
    infinity)."""
    import json

    cp = essential_terms([[2.0, EPS], [0.0, EPS]])
    d = cp.to_dict()
    assert d["corners"] == [2.0, None]
    assert json.loads(json.dumps(d, allow_nan=False)) == d


# ----------------------------------------------------------------------------- limits and errors


def test_charpoly_or_none_respects_the_size_limit():
    """Above the limit the caller gets None and a reason naming the size; below it the same
    result as essential_terms (common practice, no source)."""
    A = np.zeros((5, 5))
    cp, reason = charpoly_or_none(A, max_size=4)
    assert cp is None
    assert "size 5" in reason and "limit 4" in reason
    cp, reason = charpoly_or_none(A)
    assert reason is None and cp == essential_terms(A)
    assert MAX_DENSE_SIZE >= 100


@pytest.mark.parametrize(
    ("A", "fragment"),
    [
        ([[1.0, float("nan")], [0.0, 0.0]], "A[0, 1] is nan"),
        ([[1.0, 0.0], [INF, 0.0]], "A[1, 0] is inf"),
        ([[1.0, 2.0, 3.0]], "square 2-D array, got shape (1, 3)"),
        ([1.0, 2.0], "square 2-D array, got shape (2,)"),
        ([["a", "b"], ["c", "d"]], "square array of numbers"),
    ],
)
def test_bad_matrices_raise_one_error_type(A, fragment):
    """Bad input raises InvalidArray naming the entry and the rule (project rule)."""
    for func in (tropical_permanent, essential_terms, poly_cycle_coefficients, charpoly_or_none):
        with pytest.raises(InvalidArray) as info:
            func(A)
        assert fragment in str(info.value)
    with pytest.raises(InvalidArray) as info:
        characteristic_value(A, 0.0)
    assert fragment in str(info.value)


def test_other_errors_state_the_rule():
    """NaN as a point and too large an enumeration are refused with the rule in the message."""
    with pytest.raises(InvalidArray) as info:
        characteristic_value(np.zeros((2, 2)), float("nan"))
    assert str(info.value) == "z must be a number or ±inf, got nan"
    n = MAX_ENUMERATION_SIZE + 1
    with pytest.raises(MaxPlusError) as info:
        poly_cycle_coefficients(np.zeros((n, n)))
    assert str(info.value) == (
        f"poly_cycle_coefficients enumerates permutations and accepts n <= "
        f"{MAX_ENUMERATION_SIZE}, got n = {n}"
    )


def test_docstring_examples():
    """The doctested examples of the module hold."""
    result = doctest.testmod(charpoly, optionflags=doctest.NORMALIZE_WHITESPACE)
    assert result.attempted >= 10
    assert result.failed == 0
