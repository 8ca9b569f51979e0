r"""The exact part of the judge: an event log against the model's max-plus equations.

(The statistics of random models and the verdict are :mod:`.judge`.) An event log (see
:mod:`.eventlog`) lists completed firings. Firing ``k`` of ``t`` is judged *locally*, from the
logged completion times of the firings it waits for: with
:math:`\operatorname{term}_p(k) = 0` for :math:`k \le m_p`, else :math:`x_u(k - m_p) + h_p(k)`,

.. math::  s_t(k) = \max_{p = (u \to t)} \operatorname{term}_p(k), \qquad x_t(k) = s_t(k) + d_t(k).

With fixed numbers the log must match these equations. Random draws are unknown, so the judge
checks what holds for *every* draw in the support ``[lo, hi]`` of each law
(:func:`support_bounds`): the start lies in ``[max_p (x_u + lo_p), max_p (x_u + hi_p)]``, the
duration ``x − s`` in ``[lo_t, hi_t]`` (without ``start``: the completion between the sums).
Where a transition's duration and input holds are fixed the interval is a point: a firing that
waits longer than its tokens is a violation. A wrong time also upsets the firings that wait for
it, so violations are listed by the earlier of the logged value and its lower bound: the first
one is usually the cause of those that follow.

A firing whose predecessor is not logged (the log starts late or stops early) is not judged. A
firing missing *inside* the logged range of its transition (7 absent, 8 logged) is a violation
when all numbers are fixed, since firings of a transition then complete in order. With random
ones firing 7 may still run where the log ends: it is a violation only when a logged firing
needed it and every logged transition has its firing 1 (the log was not cut at its beginning).

Tolerance. A logged time ``a`` and its bound ``b`` are both reached from one logged time
``r``: the completion that made the binding token (0 for an initial token) for a start, the
start for a completion. They agree when

.. math::  |a - b| \le \text{tolerance} \cdot \max(1, |a - r|, |b - r|) + \epsilon,

the tolerance being relative to the *durations* ``a − r`` and ``b − r`` (a hold, a duration,
or both), not to the clock: a slip of 3 s in a 12 s fill is caught at time 10^7 as at time
10. ``ε`` is :data:`FLOAT_ULPS` units in the last place of the larger time (the rounding of
the simulator's sums, a time scale, a text round trip), plus the log's time resolution when
its times are rounded (:func:`rounding`).

References
----------
Baccelli, F., Cohen, G., Olsder, G. J., Quadrat, J.-P. (1992). *Synchronization and Linearity*.
Wiley: ch. 2 (firing-time equations of a timed event graph), ch. 8 (the cycle time of the mean
durations is a lower bound of the cycle time of a stochastic event graph).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..algebra.spectral import howard
from .durations import Distribution, Empirical, SpecTable, Triangular, Uniform
from .errors import ModelError
from .eventlog import EventLog, _fmt, _sort_key
from .modelfile import Model

__all__ = ["FLOAT_ULPS", "MAX_LISTED", "MIN_RATE_FIRINGS", "RATE_NOTE_TOLERANCE", "ExactCheck",
           "check_events", "check_tolerance", "float_margin", "rounding", "support_bounds"]

MAX_LISTED = 20
"""Violations spelled out in ``reasons`` and ``first_violations``; the rest are counted."""
MIN_RATE_FIRINGS = 10
"""Fewest firings of a transition for its growth rate to enter ``cycle_time_from_log``."""
RATE_NOTE_TOLERANCE = 0.01
"""Relative gap between the log's cycle time and the model's worth a note (common practice)."""
DENSE_FACTOR = 4
"""A dense table of firings is used while it has at most this many cells per logged firing."""
FLOAT_ULPS = 16
"""Units in the last place of the larger time that two times may differ by and still be
equal (floating-point error, whatever the tolerance)."""
# violation kind -> (rule, whether the logged value lies below the expected one)
_KINDS = {1: ("start", True), 2: ("start", False), 3: ("duration", True),
          4: ("duration", False), 5: ("completion", True), 6: ("completion", False)}


def _many(n: int, noun: str) -> str:
    return f"1 {noun} was" if n == 1 else f"{n} {noun}s were"


def support_bounds(law: Distribution) -> tuple[float, float]:
    """Smallest and largest value a law can draw, ``(lo, hi)``; ``hi`` may be ``inf``.

    A law that is not random gives ``(mean, mean)``; laws on ``[0, inf)`` and laws not known
    here give ``(0, inf)``, always safe bounds for a duration.

    >>> from cyclecheck.simulate.durations import parse_spec
    >>> support_bounds(parse_spec({"dist": "uniform", "low": 2, "high": 5}))
    (2.0, 5.0)
    >>> support_bounds(parse_spec({"dist": "gamma", "mean": 3, "cv": 0.5}))
    (0.0, inf)
    """
    if not law.is_random:
        return float(law.mean), float(law.mean)
    if isinstance(law, (Uniform, Triangular)):
        return float(law.low), float(law.high)
    if isinstance(law, Empirical):
        return float(min(law.values)), float(max(law.values))
    return 0.0, math.inf  # exponential, gamma, Erlang, log-normal, Weibull, truncated normal


def _bounds(table: SpecTable) -> tuple[np.ndarray, np.ndarray]:
    pairs = np.array([support_bounds(law) for law in table.laws] + [(0.0, 0.0)]).reshape(-1, 2)
    has_law = table.codes >= 0
    return (np.where(has_law, pairs[table.codes, 0], table.values),
            np.where(has_law, pairs[table.codes, 1], table.values))


# --------------------------------------------------------------------------- the judge


class _Index:
    """Find logged firings ``(u, j)`` in a log sorted by (unit, firing), vectorized; a unit is
    a (replication, transition) pair, :attr:`EventLog.unit`.

    A complete log fills most cells of the table ``u · W + j`` (``W`` = largest firing + 1),
    looked up directly. A sparse log (or huge firing numbers) uses binary search over sorted
    keys in which each firing number is replaced by its rank among the logged ones.
    """

    def __init__(self, log: EventLog) -> None:
        t, k, self.n = log.unit, log.firing, log.n_firings
        units = log.n_units
        key = _sort_key(t, k, units)
        self.table = None
        self.numbers: np.ndarray | None = None
        if key is not None and (int(k.max()) + 1) * units <= DENSE_FACTOR * self.n:
            self.width = np.int64(k.max() + 1)
            self.table = np.full(int(self.width) * units, -1, dtype=np.int64)
            self.table[key] = np.arange(self.n)
        else:
            self.numbers = np.unique(k)
            self.width = np.int64(self.numbers.size)
            key = t * self.width + np.searchsorted(self.numbers, k)
        self.keys = key

    def find(self, u: np.ndarray, j: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """``(found, pos)`` for firings ``1 <= j <= largest logged firing``.

        Where firing ``j`` of ``u`` is not logged, ``pos`` is the position of the first logged
        firing after it in (transition, firing) order (``n`` when there is none).
        """
        if self.table is not None:
            q = u * self.width + j
            pos = self.table[q]
            found = pos >= 0
            pos[~found] = np.searchsorted(self.keys, q[~found])
            return found, pos
        r = np.searchsorted(self.numbers, j)
        q = u * self.width + r
        pos = np.searchsorted(self.keys, q)
        pc = np.minimum(pos, self.n - 1)
        found = (self.numbers[np.minimum(r, self.width - 1)] == j) & (self.keys[pc] == q)
        return found, pos


def rounding(model: Model, log: EventLog) -> float:
    """The rounding of the log's times to allow for: its resolution (the coarsest decimal
    grid its times lie on, :attr:`EventLog.resolution`) when the model has a continuous
    random law, whose draws lie on no grid, so that times on one were rounded by the
    simulator; else 0.0 (fixed or resampled numbers may put every time on a grid by
    themselves)."""
    laws = [*model.durations.laws, *model.holds.laws]
    if any(law.is_random and law.is_continuous for law in laws):
        return float(log.resolution)
    return 0.0


def check_tolerance(tolerance: float) -> float:
    """The tolerance as a float; a ModelError (item ``tolerance``) unless finite and >= 0."""
    if (isinstance(tolerance, bool) or not isinstance(tolerance, (int, float, np.floating))
            or not math.isfinite(tolerance) or tolerance < 0):
        raise ModelError(f"must be a finite number >= 0, got {tolerance!r}", item="tolerance")
    return float(tolerance)


def float_margin(*times: np.ndarray | float) -> np.ndarray:
    """The floating-point slack of a comparison of times: :data:`FLOAT_ULPS` units in the
    last place of the largest of them (a time of 10^7 carries about 2·10^-9 of rounding from
    the simulator's sums, a time scale, a CSV round trip)."""
    scale = np.abs(np.asarray(times[0], dtype=np.float64))
    for t in times[1:]:
        scale = np.maximum(scale, np.abs(t))
    with np.errstate(invalid="ignore"):
        return FLOAT_ULPS * np.finfo(np.float64).eps * np.where(np.isfinite(scale), scale, 0.0)


def _below(a: np.ndarray, b: np.ndarray, ref: np.ndarray, tol: float,
           slack: float = 0.0) -> np.ndarray:
    """``a`` lies below ``b`` by more than the tolerance (never where either is infinite).

    ``a`` and ``b`` are a logged time and its bound, both reached from the logged time
    ``ref`` (the completion that made the binding token, the firing's start, or 0 for an
    initial token): the spans ``a − ref`` and ``b − ref`` are durations, and the tolerance is
    relative to them, not to the clock. ``slack`` (absolute: the log's rounding) and the
    floating-point margin of the times are added. An infinite bound makes ``b - a`` infinite
    or NaN and the scale infinite, and the comparison False.
    """
    with np.errstate(invalid="ignore"):
        span = np.maximum(np.maximum(np.abs(a - ref), np.abs(b - ref)), 1.0)
        return b - a > tol * span + slack + float_margin(a, b)


@dataclass
class _Pairs:
    """Every (logged firing, input place) pair, grouped by firing: firing ``i`` owns the pairs
    ``offsets[i] : offsets[i] + in_degree``."""

    place: np.ndarray
    offsets: np.ndarray
    need: np.ndarray   # the term needs a predecessor firing (k > m_p)
    pred: np.ndarray   # its firing number j = k − m_p
    found: np.ndarray  # it is logged
    pos: np.ndarray    # its position in the log (see _Index.find); -1 where not needed
    origin: np.ndarray  # completion of the predecessor firing (0 for an initial token)
    low: np.ndarray    # earliest availability of the token (0 for an initial token)
    high: np.ndarray   # latest availability (inf when the hold is unbounded)
    src: np.ndarray    # the unit (replication, transition) of the predecessor firing


def _pairs(model: Model, log: EventLog, index: _Index, hold_lo: np.ndarray,
           hold_hi: np.ndarray) -> _Pairs:
    graph = model.graph()
    porder, pstart = graph.by_target
    t = log.transition
    count = graph.in_degree[t]
    offsets = np.cumsum(count) - count
    row_of = np.repeat(np.arange(log.n_firings), count)
    place = porder[pstart[t][row_of] + np.arange(row_of.size) - offsets[row_of]]
    pred = log.firing[row_of] - model.tokens[place]
    need = pred >= 1
    src = model.source[place]
    if log.replication is not None:  # the predecessor is in the same replication
        src = src + (log.unit - t)[row_of]
    # every pair at once (no gather of the needed ones): pred < 1 is looked up as firing 1
    found, pos = index.find(src, np.maximum(pred, 1))
    found &= need
    pos[~need] = -1
    origin = np.where(found, log.time[np.where(found, pos, 0)], 0.0)
    low = np.where(found, origin + hold_lo[place], 0.0)
    same = np.array_equal(hold_lo, hold_hi)
    high = low if same else np.where(found, origin + hold_hi[place], 0.0)
    return _Pairs(place, offsets, need, pred, found, pos, origin, low, high, src)


def _origin(pairs: _Pairs, bound: np.ndarray, reached: np.ndarray) -> np.ndarray:
    """Per firing, the completion its start bound was reached from: the ``origin`` of the
    input pair whose availability ``reached`` attains the firing's ``bound`` (the latest such
    completion when several tie)."""
    rows = np.repeat(np.arange(bound.size), np.diff(np.r_[pairs.offsets, reached.size]))
    binding = np.where(reached == bound[rows], pairs.origin, -np.inf)
    return np.maximum.reduceat(binding, pairs.offsets)


def _holes(model: Model, log: EventLog, pairs: _Pairs, first: np.ndarray) -> tuple[Any, ...]:
    """Firings missing inside the logged range of their transition.

    Returns ``gap`` (missing firings just before each logged one), ``count`` (those of them
    that are violations), ``needed_by`` (a logged firing that needed one of them, or -1) and
    whether every logged transition has its firing 1.
    """
    t, k, n = log.unit, log.firing, log.n_firings
    gap = np.r_[0, k[1:] - k[:-1] - 1]
    gap[first] = 0
    from_one = bool(np.all(k[first] == 1))
    count = np.zeros(n, dtype=np.int64)
    needed_by = np.full(n, -1, dtype=np.int64)
    if not model.is_random:
        count[:] = gap
    elif from_one and gap.any():
        miss = np.flatnonzero(pairs.need & ~pairs.found)
        pc = np.minimum(pairs.pos[miss], n - 1)
        inside = ((pairs.pos[miss] < n) & (t[pc] == pairs.src[miss])
                  & ~first[pc])  # pc is the logged firing right after the hole
        miss, pc = miss[inside], pc[inside]
        if miss.size:
            distinct = np.unique(np.stack([pc, pairs.pred[miss]]), axis=1)
            np.add.at(count, distinct[0], 1)
            rows = np.searchsorted(pairs.offsets, miss, side="right") - 1
            needed_by[pc[::-1]] = rows[::-1]  # the first firing that needed it is named
    return gap, count, needed_by, from_one


@dataclass
class ExactCheck:
    """What the exact part of the judge found: each firing against the bounds of its draws.

    Arrays are aligned with the firings of :attr:`log` (sorted order). ``ready_low`` and
    ``ready_high`` bound the start of each firing from the logged completions it waits for
    (equal where every input hold is fixed: the start is then known exactly, log column or not);
    ``judged`` is False where a firing it waits for is not logged. ``resolution`` is the
    rounding of the log's times allowed for (:func:`rounding`; 0.0 when none).
    """

    log: EventLog
    pairs: _Pairs
    judged: np.ndarray
    ready_low: np.ndarray
    ready_high: np.ndarray
    tolerance: float
    violations: int
    first_violations: list[dict[str, Any]]
    notes: list[str]
    firings_missing: int
    from_one: bool
    present: np.ndarray  # (units,) each (replication, transition) has a logged firing
    cycle_time_from_log: float | None
    resolution: float = 0.0

    @property
    def firings_checked(self) -> int:
        return int(self.judged.sum())

    def absent(self, model: Model) -> list[str]:
        """Transitions with no row in the log; one absent from some replications only is
        named with them, e.g. ``pack (replications "2", "5")``."""
        log, n = self.log, model.n_transitions
        grid = ~self.present.reshape(log.n_replications, n)
        out = []
        for t in np.flatnonzero(grid.any(axis=0)).tolist():
            reps = np.flatnonzero(grid[:, t])
            if reps.size == log.n_replications:
                out.append(model.transition_ids[t])
            else:
                labels = ", ".join(f'"{log.replication_labels[r]}"' for r in reps[:5])
                more = " ..." if reps.size > 5 else ""
                out.append(f"{model.transition_ids[t]} (replications {labels}{more})")
        return out

    def section(self, model: Model) -> dict[str, Any]:
        """The keys of the judgement document that come from the exact part."""
        lam = float(howard(model.graph()).max_cycle_time)
        log = self.log
        return {
            "log": None if log.path is None else str(log.path),
            "tolerance": self.tolerance,
            "time_resolution": self.resolution or None,
            "checks": "bounds" if model.is_random else "exact",
            "firings_logged": log.n_firings,
            "firings_checked": self.firings_checked,
            "firings_unjudged": log.n_firings - self.firings_checked,
            "firings_missing": self.firings_missing,
            "violations": self.violations,
            "first_violations": self.first_violations,
            "complete": bool(self.present.all() and self.from_one
                             and not self.firings_missing),
            "cycle_time_from_log": self.cycle_time_from_log,
            "cycle_time": lam,
            "cycle_time_basis": ("lower bound: the cycle time of the mean durations (Baccelli "
                                 "et al. 1992, ch. 8)" if model.is_random else "exact"),
            "time_unit": model.time_unit,
        }

    def reasons(self) -> list[str]:
        """The violations as sentences (the first ones, then a count)."""
        out = [v["message"] for v in self.first_violations]
        if self.violations > len(out):
            out.append(f"... and {self.violations - len(out)} more violations")
        return out


def check_events(model: Model, log: EventLog, *, tolerance: float = 1e-6,
                 max_listed: int = MAX_LISTED) -> ExactCheck:
    """The exact part of the judge on a checked :class:`EventLog` (see the module doc)."""
    tol = check_tolerance(tolerance)
    resolution = rounding(model, log)
    ids = model.transition_ids
    hold_lo, hold_hi = _bounds(model.holds)
    dur_lo, dur_hi = _bounds(model.durations)
    index = _Index(log)
    pairs = _pairs(model, log, index, hold_lo, hold_hi)
    t, k, x, s = log.transition, log.firing, log.time, log.start
    u = log.unit
    n_rows = log.n_firings

    judged = np.add.reduceat((pairs.need & ~pairs.found).astype(np.int64), pairs.offsets) == 0
    low = np.maximum.reduceat(pairs.low, pairs.offsets)
    high = np.maximum.reduceat(pairs.high, pairs.offsets)
    ref_low = _origin(pairs, low, pairs.low)
    ref_high = ref_low if pairs.high is pairs.low else _origin(pairs, high, pairs.high)
    dlo, dhi = dur_lo[t], dur_hi[t]
    kind = np.zeros(n_rows, dtype=np.int8)
    expected, when = np.full(n_rows, np.nan), np.full(n_rows, np.nan)
    with np.errstate(invalid="ignore"):  # inf - inf where a bound is unbounded
        # (code, a, b, the logged time both are reached from, logged value, its lower
        # bound): a below b is a violation. A violation is dated by the lower of the logged
        # value and its lower bound: a firing that waits for a wrong time is dated no
        # earlier, so the cause comes first in the list.
        checks = ([(1, s, low, ref_low, s, low), (2, high, s, ref_high, s, low),
                   (3, x, s + dlo, s, x, s + dlo), (4, s + dhi, x, s, x, s + dlo)]
                  if s is not None else
                  [(5, x, low + dlo, ref_low, x, low + dlo),
                   (6, high + dhi, x, ref_high, x, low + dlo)])
        for code, a, b, ref, value, lower in checks:  # the first violation found is kept
            hit = np.flatnonzero(_below(a, b, ref, tol, resolution) & judged & (kind == 0))
            if hit.size:
                kind[hit], expected[hit] = code, (b if code % 2 else a)[hit]
                when[hit] = np.minimum(value[hit], lower[hit])

    first = np.r_[True, u[1:] != u[:-1]]
    gap, hole_count, needed_by, from_one = _holes(model, log, pairs, first)
    violating, hole_rows = np.flatnonzero(kind), np.flatnonzero(hole_count)
    n_violations = int(violating.size + hole_count.sum())
    entries = [(when[i], u[i], k[i], i, True)
               for i in _earliest(violating, when, u, k, max_listed)]
    entries += [(x[i], u[i], k[i] - gap[i], i, False)
                for i in _earliest(hole_rows, x, u, k - gap, max_listed)]
    first_violations = [
        _violation(model, log, pairs, i, int(kind[i]), float(expected[i]), dur_lo, dur_hi)
        if timing else _hole(model, log, i, int(gap[i]), int(hole_count[i]), int(needed_by[i]))
        for *_, i, timing in sorted(entries)[:max_listed]]

    notes = []
    if resolution:
        notes.append(f"the log's times all lie on a grid of {_fmt(resolution)} (the simulator "
                     "rounds them): the exact checks allow that much between two logged "
                     "times, and the tests of durations and holds are made conservative for it"
                     " (see each test)")
    n_checked, n_unjudged = int(judged.sum()), int((~judged).sum())
    if n_checked == 0 and n_violations == 0:
        raise ModelError("no firing of the event log can be judged: every firing needs an "
                         "earlier firing that is not in the log", file=log.path)
    if n_unjudged:
        notes.append(f"{_many(n_unjudged, 'logged firing')} not judged: each needs an "
                     "earlier firing that is not in the log (the log starts after firing 1 of "
                     "a transition, misses a firing, or stops before it)")
    excused = np.flatnonzero(gap > hole_count)
    if excused.size:
        i = int(excused[0])
        notes.append(f"{_many(int((gap - hole_count).sum()), 'firing')} missing inside the "
                     f'logged range of its transition (for example firing {k[i] - gap[i]} of '
                     f'"{ids[t[i]]}"{log.in_replication(i)} while firing {k[i]} is logged); '
                     "with random durations firings may end out of order, so they may still "
                     "have been in progress where the log ends"
                     + ("" if from_one else ", or the log was cut at its beginning"))
    present = np.zeros(log.n_units, dtype=bool)
    present[u] = True

    from_log = _log_cycle_time(log, index, first)
    lam = float(howard(model.graph()).max_cycle_time)
    if from_log is not None and not model.is_random:
        rel = (from_log - lam) / lam if lam > 0 else 0.0
        if abs(rel) > RATE_NOTE_TOLERANCE:
            notes.append(f"the log's cycle time {_fmt(from_log)} differs from the model's "
                         f"{_fmt(lam)} by {100 * rel:+.3g} %: over few firings or a long "
                         "transient the growth rate of the log has not settled")
    return ExactCheck(log, pairs, judged, low, high, tol, n_violations, first_violations, notes,
                      int(gap.sum()), from_one, present, from_log, resolution)


def _earliest(rows: np.ndarray, when: np.ndarray, t: np.ndarray, k: np.ndarray,
              count: int) -> list[int]:
    """The ``count`` rows of ``rows`` that come first by (when, transition, firing)."""
    if rows.size == 0 or count <= 0:
        return []
    if rows.size > count:  # a superset of the first ones, before the exact sort
        rows = rows[when[rows] <= np.partition(when[rows], count - 1)[count - 1]]
    return rows[np.lexsort((k[rows], t[rows], when[rows]))][:count].tolist()


def _violation(model: Model, log: EventLog, pairs: _Pairs, i: int, kind: int, expected: float,
               dur_lo: np.ndarray, dur_hi: np.ndarray) -> dict[str, Any]:
    t, k, x = int(log.transition[i]), int(log.firing[i]), float(log.time[i])
    s = None if log.start is None else float(log.start[i])
    rule, early = _KINDS[kind]
    name = f'firing {k} of "{model.transition_ids[t]}"{log.in_replication(i)}'
    lo, hi, law = float(dur_lo[t]), float(dur_hi[t]), model.durations[t].describe()
    a = int(pairs.offsets[i])
    span = slice(a, a + int(model.graph().in_degree[t]))
    exact_tokens = bool(np.array_equal(pairs.low[span], pairs.high[span]))
    j = a + int(np.argmax(pairs.low[span] if early else pairs.high[span]))
    place = f'"{model.place_name(int(pairs.place[j]))}"'
    token = "its initial tokens were available at 0"
    if pairs.need[j]:  # name the firing that made the binding token, and the hold
        hold, pred = model.holds[int(pairs.place[j])], int(pairs.pos[j])
        plus = (f"plus the hold {_fmt(hold.mean)}" if not hold.is_random else
                f"plus the shortest hold {_fmt(pairs.low[j] - log.time[pred])} of "
                f"{hold.describe()}")
        token = (f"its input place {place} was available at {_fmt(pairs.low[j])} (firing "
                 f'{log.firing[pred]} of "{model.transition_ids[log.transition[pred]]}" '
                 f"completed at {_fmt(log.time[pred])}, {plus})")
    if rule == "completion" and exact_tokens and lo == hi:
        text = (f"{name} completed at {_fmt(x)} but the model gives {_fmt(expected)}: {token} "
                f"and the duration is {_fmt(lo)}")
    elif rule == "completion" and early:
        text = (f"{name} completed at {_fmt(x)}, earlier than any draw allows: at least "
                f"{_fmt(expected)}, as {token} and the shortest duration of {law} is {_fmt(lo)}")
    elif rule == "completion":
        text = (f"{name} completed at {_fmt(x)}, later than any draw allows: at most "
                f"{_fmt(expected)}, as its last token was there by {_fmt(pairs.high[j])} at the "
                f"latest and the longest duration of {law} is {_fmt(hi)}")
    elif rule == "start" and early:
        text = f"{name} started at {_fmt(s)}, before its tokens were available: {token}"
    elif rule == "start":
        text = (f"{name} started at {_fmt(s)}, later than its tokens allowed: "
                + (f"they were all there at {_fmt(expected)}" if exact_tokens else
                   f"the last of them was there by {_fmt(expected)} at the latest")
                + f" (input place {place})")
    elif lo == hi:
        text = (f"{name} took {_fmt(x - s)} (from {_fmt(s)} to {_fmt(x)}) but its duration is "
                f"{_fmt(lo)}")
    else:
        text = (f"{name} took {_fmt(x - s)} (from {_fmt(s)} to {_fmt(x)}), "
                + (f"less than the shortest duration {_fmt(lo)}" if early else
                   f"more than the longest duration {_fmt(hi)}") + f" of {law}")
    where = log.item(i)
    out: dict[str, Any] = {"transition": model.transition_ids[t], "firing": k, "time": x,
                           "expected": expected, "rule": rule,
                           "message": f"{text} [log {where}]", "where": where}
    if s is not None:
        out["start"] = s
    if log.n_replications > 1:
        out["replication"] = log.replication_labels[int(log.replication[i])]
    return out


def _hole(model: Model, log: EventLog, i: int, gap: int, count: int,
          needed_by: int) -> dict[str, Any]:
    tid, k = model.transition_ids[int(log.transition[i])], int(log.firing[i])
    rep = log.in_replication(i)
    text = (f'firing {k - 1} of "{tid}"{rep} is' if gap == 1 else
            f'firings {k - gap} to {k - 1} of "{tid}"{rep} are') + (
        f" missing while firing {k} is logged")
    if needed_by >= 0:
        text += (f' (firing {log.firing[needed_by]} of '
                 f'"{model.transition_ids[log.transition[needed_by]]}", logged, needed '
                 + ("it)" if gap == 1 else f"{count} of them)"))
    where = log.item(i)
    out = {"transition": tid, "firing": k - gap, "time": None, "expected": None,
           "rule": "missing", "message": f"{text} [log {where}: firing {k}]", "where": where,
           "missing": count, "next_logged": k}
    if log.n_replications > 1:
        out["replication"] = log.replication_labels[int(log.replication[i])]
    return out


def _log_cycle_time(log: EventLog, index: _Index, first: np.ndarray) -> float | None:
    r"""Largest :math:`(x_t(K) - x_t(\lfloor K/2 \rfloor)) / (K - \lfloor K/2 \rfloor)`.

    ``K`` is the last logged firing of ``t``; transitions with ``K <`` :data:`MIN_RATE_FIRINGS`
    or without firing ``K // 2`` in the log are left out.
    """
    last = np.r_[np.flatnonzero(first)[1:] - 1, log.n_firings - 1]
    last = last[log.firing[last] >= MIN_RATE_FIRINGS]
    found, pos = index.find(log.unit[last], log.firing[last] // 2)
    if not found.any():
        return None
    last, pos = last[found], pos[found]
    kk = log.firing[last]
    return float(((log.time[last] - log.time[pos]) / (kk - kk // 2)).max())
