"""Which places of a model gain tokens without bound, decided for fixed and random durations.

A place ``p = (u → t)`` between two components grows by ``1/λ_u − 1/λ_t`` tokens per time unit
(:mod:`cyclecheck.algebra.stability`). ``λ_t > λ_u`` exactly when a component upstream of
``t`` but not of ``u`` is slower *on its own* than ``u`` runs.

* **Fixed durations**: the exact cycle time of every transition decides; equal rates keep
  the buffer bounded.
* **Random durations**: each component's own cycle time is estimated by running the
  components alone (the places between them removed) on the same draws as the model's
  replications (the first :data:`OWN_REPLICATIONS`). Per replication, ``e = max over the
  components upstream of t but not of u of their own cycle time − λ_u`` (with ``λ_u`` the
  largest own cycle time upstream of ``u``, from the same run), and a Student-t interval over
  the replications decides: entirely below 0, the place is bounded (not listed); entirely
  above 0, it is **unstable** and grows at the rate estimated from the cycle times of the
  model's run; otherwise the two sides run at the same rate within the precision of the
  estimate and the place is listed as **critical load**: at equal rates a random buffer is not
  positive recurrent (a queue at load 1 grows like the square root of time), and no finite run
  can tell a tiny imbalance from none. Identical values in every replication (both sides
  deterministic) count as bounded.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

import numpy as np

from ..algebra.recursion import RandomRecursion, within
from ..algebra.stability import components, growth_rates, isolated_graph
from .modelfile import Model

__all__ = ["OWN_REPLICATIONS", "fixed_unbounded", "random_unbounded", "rate_text"]

#: Replications of the components run alone (the first ones of the model's run).
OWN_REPLICATIONS = 30

_PER_HOUR = {"s": 3600.0, "sec": 3600.0, "second": 3600.0, "seconds": 3600.0,
             "min": 60.0, "minute": 60.0, "minutes": 60.0,
             "h": 1.0, "hour": 1.0, "hours": 1.0}


def rate_text(rate: float | None, unit: str) -> str:
    """Tokens per time, in the model's unit, and per hour when the unit is a known one."""
    if rate is None or not math.isfinite(rate):
        return "without limit (the upstream side takes no time)"
    per = unit or "time unit"
    text = f"{rate:.3g} tokens per {per}"
    factor = _PER_HOUR.get(unit.strip().lower()) if unit else None
    if factor and factor != 1.0:
        text = f"{rate * factor:.3g} tokens per hour ({rate:.3g} per {unit})"
    return text


def _entry(model: Model, p: int, rate: float, lam_u: float, lam_t: float, status: str,
           extra: str = "", average: str = "") -> dict[str, Any]:
    ids = model.transition_ids
    u, t = ids[int(model.source[p])], ids[int(model.target[p])]
    label = model.place_labels[p]
    name = f"{u} → {t}" + (f" ({label})" if label else "")
    unit = model.time_unit
    finite = rate if math.isfinite(rate) else None
    if status == "unstable":
        text = (f"unstable: the buffer {name} grows without bound, by {rate_text(finite, unit)}:"
                f" {u} fires every {lam_u:.4g}{' ' + unit if unit else ''}{average}, {t} "
                f"every {lam_t:.4g}{' ' + unit if unit else ''}")
    else:
        text = (f"critical load: the buffer {name} is fed as fast as it is emptied, within the "
                "precision of the estimate; at equal rates a random buffer grows without "
                f"bound (like the square root of time){extra}")
    return {"index": p, "from": u, "to": t, "growth_rate": finite, "status": status,
            "from_cycle_time": lam_u, "to_cycle_time": lam_t, "text": text}


def fixed_unbounded(model: Model, cycle_time: np.ndarray) -> list[dict[str, Any]]:
    """Unbounded places of a model with fixed durations, from the exact cycle time of every
    transition."""
    graph = model.graph()
    rates = growth_rates(graph, cycle_time)
    return [_entry(model, int(p), float(rates[p]), float(cycle_time[graph.source[p]]),
                   float(cycle_time[graph.target[p]]), "unstable")
            for p in np.flatnonzero(rates > 0)]


def _own_cycle_times(model: Model, seed: int, replications: Sequence[int], firings: int,
                     warmup: int) -> tuple[np.ndarray, Any]:
    """Own cycle time of every component in each replication, shape (R, components)."""
    graph = model.graph()
    parts = components(graph)
    sub, kept_t, kept_p = isolated_graph(graph, parts)
    own = np.zeros((len(replications), parts.count))
    if kept_t.size == 0:
        return own, parts
    samplers = [model.sampler(seed, int(r)) for r in replications]

    def durations(first: int, count: int) -> np.ndarray:
        return np.stack([s.duration_block(first, count)[:, kept_t] for s in samplers], axis=1)

    def holds(first: int, count: int) -> np.ndarray:
        if kept_p.size == 0:
            return np.zeros((count, 1, 0))
        return np.stack([s.hold_block(first, count)[:, kept_p] for s in samplers], axis=1)

    rec = RandomRecursion(within(sub, firings), durations, holds, len(samplers),
                          criticality=False)
    start = min(warmup, firings - 1)
    rec.run(start)
    before = rec.state()
    rec.run(firings - start)
    growth = (rec.state() - before) / (firings - start)  # (R, kept transitions)
    labels = parts.labels[kept_t]
    sizes = np.bincount(labels, minlength=parts.count)
    for r in range(growth.shape[0]):
        own[r] = np.bincount(labels, weights=growth[r], minlength=parts.count) / np.maximum(
            sizes, 1)
    return own, parts


def random_unbounded(model: Model, seed: int, replications: Sequence[int], firings: int,
                     warmup: int, by_transition: np.ndarray) -> list[dict[str, Any]]:
    """Unbounded places of a random model (see the module docstring for the decision).

    ``by_transition`` are the model run's cycle times of every transition, for the growth
    rate of unstable places.
    """
    from .estimate import student_quantile

    graph = model.graph()
    parts = components(graph)
    if parts.crossing.size == 0:
        return []
    reps = list(replications)[:OWN_REPLICATIONS]
    own, parts = _own_cycle_times(model, seed, reps, firings, warmup)
    bits = parts.ancestry(graph)
    if bits is None:
        return []  # too many components to decide; the fixed-duration check still applies
    preds: list[set[int]] = [set() for _ in range(parts.count)]
    for p in parts.crossing.tolist():
        preds[int(parts.labels[graph.target[p]])].add(int(parts.labels[graph.source[p]]))
    reach = own.copy()  # largest own cycle time upstream, per replication
    for c in parts.order:
        for u in preds[c]:
            np.maximum(reach[:, c], reach[:, u], out=reach[:, c])
    quantile = student_quantile(0.975, len(reps) - 1) if len(reps) > 1 else np.inf
    out = []
    for p in parts.crossing.tolist():
        a = int(parts.labels[graph.source[p]])
        b = int(parts.labels[graph.target[p]])
        diff = bits[b] & ~bits[a]
        side = np.zeros(len(reps))
        while diff:
            low = diff & -diff
            np.maximum(side, own[:, low.bit_length() - 1], out=side)
            diff ^= low
        e = side - reach[:, a]
        mean = float(e.mean())
        half = quantile * float(e.std(ddof=1)) / math.sqrt(len(reps)) if len(reps) > 1 else 0.0
        if half == 0.0 and mean <= 0.0:
            continue  # the same values in every replication: deterministic, bounded
        if mean + half < 0.0:
            continue  # bounded: the downstream side is faster on its own
        lam_u = float(by_transition[graph.source[p]])
        lam_t = float(by_transition[graph.target[p]])
        rate = max(0.0, 1.0 / lam_u - 1.0 / lam_t) if lam_u > 0 and lam_t > 0 else 0.0
        status = "unstable" if mean - half > 0.0 else "critical load"
        extra = (f" (own cycle time of the slower side minus the feeding side's: {mean:.3g} "
                 f"± {half:.2g})")
        out.append(_entry(model, p, rate, lam_u, lam_t, status, extra, " on average"))
    return out
