"""Readable text summaries of result documents, for the terminal."""

from __future__ import annotations

import math
from typing import Any

__all__ = ["analysis_text", "check_text", "simulation_text", "sweep_text", "trace_text"]

#: Rows of a list shown in a summary (the smallest slacks, the largest derivatives, ...); the
#: rest is counted ("and N more").
TOP_SLACKS = 5


def _more(total: int, shown: int) -> list[str]:
    """The line that says how many rows of a list were left out (none when all are shown)."""
    return [f"  and {total - shown:,} more"] if total > shown else []


def _element(entry: dict[str, Any], doc: dict[str, Any]) -> str:
    """A sensitivity entry's element as text: the transition id, or the place by its ends."""
    if entry.get("element") == "transition":
        return str(entry.get("id"))
    index = entry.get("index")
    places = doc.get("model", {}).get("places") or []
    if isinstance(index, int) and index < len(places):
        p = places[index]
        label = f" ({p['label']})" if p.get("label") else ""
        return f"{p.get('from')} -> {p.get('to')}{label}"
    return f"place {index}"


def _warnings(doc: dict[str, Any]) -> list[str]:
    """Unbounded places, first and loud."""
    return [f"WARNING        {u['text']}" for u in doc.get("unbounded_places") or []]


def _sensitivity_lines(doc: dict[str, Any], unit: str) -> list[str]:
    entries = doc.get("sensitivity") or []
    if not entries:
        method = doc.get("sensitivity_method")
        return [f"sensitivity    {method}"] if method else []
    exact = doc.get("sensitivity_exact", doc.get("exact"))
    lines = []
    b = doc.get("bottleneck")
    if b:
        what = "duration" if b["element"] == "transition" else "hold"
        lo, hi = b["ci"]
        if exact:
            value = (f"{_num(b['derivative'], 3)} (exact)" if lo == hi else
                     f"{_num(hi, 3)} when it grows, {_num(lo, 3)} when it shrinks (critical "
                     "circuits of equal ratio)")
        else:
            value = f"{_num(b['derivative'], 3)}, 95 % CI [{_num(lo, 3)}, {_num(hi, 3)}]"
        kind = "" if b["element"] == "transition" else " (place)"
        lines.append(f"bottleneck     {_element(b, doc)}{kind}: dλ/d(mean {what}) = {value}")
        fast = b["faster_10_percent"]
        lines.append(f"               10 % faster (mean {_num(b['mean'], 4)} -> "
                     f"{_num(fast['mean'], 4)}{unit}): cycle time about "
                     f"{_num(fast['cycle_time'], 4)}{unit} ({_num(fast['change'], 3)}{unit}), to "
                     "first order")
        if not b.get("on_mean_critical_circuit"):
            lines.append("               not on the critical circuit of the mean durations: "
                         "variability moved the bottleneck")
        runner = b.get("runner_up")
        if runner and not b.get("distinguishable", True):
            if exact:
                lines.append("               other elements have the same derivative (on the "
                             "same critical circuit): this one has the largest mean, so 10 % "
                             "off it gains most")
            else:
                lines.append(f"               not told apart from {_element(runner, doc)} "
                             f"({_num(runner['derivative'], 3)}): their 95 % intervals "
                             "overlap; more replications would tell them apart")
    head = "exact" if exact else "95 % CI"
    lines.append(f"sensitivity of the cycle time to each mean (dλ/dθ, {head}"
                 + ("" if exact else "; share of firings on the critical path") + "):")
    shown = entries[:TOP_SLACKS]
    width = max([20, *(len(_element(e, doc)) for e in shown)])
    for e in shown:
        lo, hi = e["ci"]
        crit = e.get("path_criticality")
        tail = f"  {100 * crit:5.1f} %" if crit is not None and not exact else ""
        ci = f"[{_num(lo, 3)}, {_num(hi, 3)}]"
        lines.append(f"  {_element(e, doc):<{width}} {_num(e['derivative'], 3):>8}  "
                     f"{ci:<16}{tail}".rstrip())
    lines += _more(len(entries) + int(doc.get("sensitivity_omitted") or 0), TOP_SLACKS)
    return lines


def _utilization_lines(doc: dict[str, Any]) -> list[str]:
    util = doc.get("utilization") or {}
    servers = doc.get("servers") or {}
    busy = doc.get("busy_servers") or {}
    if not util:
        return []
    rows = sorted(util.items(), key=lambda kv: -(kv[1] if kv[1] is not None else -1.0))
    lines = ["utilization per server (busy share of each of its servers):"]
    for tid, u in rows[:TOP_SLACKS]:
        s = servers.get(tid)
        if u is None:
            b = busy.get(tid)
            extra = f", {b:.3g} firings in progress on average" if b is not None else ""
            lines.append(f"  {tid:<20}      no self-loop: no server limit{extra}")
        else:
            who = f"{s} servers in turn" if s and s > 1 else "1 server"
            lines.append(f"  {tid:<20} {100 * u:5.1f} %  ({who})")
    return lines + _more(len(rows), TOP_SLACKS)


def _num(x: float | None, digits: int = 6) -> str:
    if x is None:
        return "unbounded"
    if x == 0:
        return "0"
    return f"{x:.{digits}g}"


def _unit(doc: dict[str, Any]) -> str:
    unit = doc.get("time_unit") or doc.get("model", {}).get("time_unit") or ""
    return f" {unit}" if unit else ""


def _estimate_lines(side: dict[str, Any], unit: str) -> list[str]:
    lam = side["cycle_time"]
    lo, hi = side["cycle_time_ci"]
    lines = []
    if side.get("exact"):
        lines.append(f"cycle time     {_num(lam)}{unit} (exact)")
    else:
        half = (hi - lo) / 2
        rel = f", ±{100 * half / lam:.2g} %" if lam else ""
        lines.append(f"cycle time     {_num(lam)}{unit}  95 % CI [{_num(lo)}, {_num(hi)}]{rel}")
    per = f" per{unit}" if unit else " per time unit"
    lines.append(f"throughput     {_num(side['throughput'])} firings{per}")
    bounds = side.get("bounds")
    if bounds:
        lines.append(f"lower bound    {_num(bounds['lower'])}{unit}  (exact: the cycle time of the "
                     "mean durations)")
        if bounds.get("upper") is not None:
            lines.append(f"upper bound    {_num(bounds['upper'])}{unit}  (estimated: E Z(K)/K, "
                         "subadditive)")
        else:
            lines.append(f"upper bound    {bounds.get('upper_method', 'not computed')}")
    if side.get("firings_simulated"):
        lines.append(f"firings        {side['firings_simulated']:,} simulated")
    lines += [f"note           {note}" for note in side.get("notes") or []]
    return lines


#: Transitions of a circuit printed in full; longer ones are shortened in the middle.
CIRCUIT_SHOWN = 12


def _circuit_text(circuit: list[str]) -> str:
    ids = [*circuit, circuit[0]]
    if len(circuit) <= CIRCUIT_SHOWN:
        return " -> ".join(ids)
    head, tail = ids[: CIRCUIT_SHOWN // 2], ids[-CIRCUIT_SHOWN // 2 :]
    return (" -> ".join(head) + f" -> ... ({len(circuit)} transitions) ... -> "
            + " -> ".join(tail))


def analysis_text(doc: dict[str, Any]) -> str:
    """Summary of ``cyclecheck analyze``."""
    unit = _unit(doc)
    model = doc.get("model", {})
    lines = [f"{model.get('name', 'model')}: {model.get('n_transitions', '?')} transitions, "
             f"{model.get('n_places', '?')} places"]
    lines += _warnings(doc)
    lines += _estimate_lines(doc, unit)
    by_t = doc["cycle_time_by_transition"]
    if doc.get("strongly_connected") is False:
        lines.append("not strongly connected: cycle times differ by transition")
        shown = sorted(by_t.items(), key=lambda kv: -kv[1])[:TOP_SLACKS]
        lines += [f"  {tid:<20} {_num(v)}{unit}" for tid, v in shown]
        lines += _more(len(by_t), len(shown))
    basis = doc.get("critical_circuits_basis")
    ratios = doc.get("critical_circuit_ratios") or []
    for i, circuit in enumerate(doc.get("critical_circuits", [])[:3]):
        head = "critical       " if i == 0 else "               "
        tail = f"  (of the {basis})" if basis and i == 0 else ""
        if len(ratios) > i and doc.get("strongly_connected") is False:
            tail += f"  ratio {_num(ratios[i])}"
        lines.append(head + _circuit_text(circuit) + tail)
    if doc.get("cyclicity"):
        lines.append(f"cyclicity      {doc['cyclicity']}")
    if doc.get("transient_firings") is not None:
        lines.append(f"transient      periodic from firing {doc['transient_firings']}")
    slack = doc.get("slack", {}).get("transitions", {})
    near = sorted((v, k) for k, v in slack.items() if v is not None and v > 0)[:TOP_SLACKS]
    if near:
        of_mean = " of the mean durations" if basis else ""
        lines.append(f"smallest slack{of_mean} (duration increase before the cycle time "
                     "changes):")
        lines += [f"  {tid:<20} {_num(v)}{unit}" for v, tid in near]
        lines += _more(sum(1 for v in slack.values() if v is not None and v > 0), len(near))
    cert = doc.get("certificate")
    if cert:
        lines.append(("certificate    checked: " if cert["checked"] else "certificate    FAILED: ")
                     + f"residual {cert['eigen_residual']:.1e}")
    lines += _sensitivity_lines(doc, unit)
    return "\n".join(lines)


def simulation_text(doc: dict[str, Any]) -> str:
    """Summary of ``cyclecheck simulate``."""
    unit = _unit(doc)
    model = doc.get("model", {})
    lines = [f"{model.get('name', 'model')}: SimPy simulation"]
    lines += _warnings(doc)
    lines += _estimate_lines(doc, unit)
    lines += _utilization_lines(doc)
    lines += _sensitivity_lines(doc, unit)
    if doc.get("trace"):
        lines.append(f"event log      {doc['trace']}")
    return "\n".join(lines)


def check_text(doc: dict[str, Any]) -> str:
    """Summary of ``cyclecheck check``: the verdict first."""
    unit = _unit(doc)
    comp = doc["comparison"]
    lines = [f"verdict        {comp['verdict'].upper()}"]
    lines += [f"  - {r}" for r in comp["reasons"]]
    lines.append("max-plus side:")
    lines += ["  " + s for s in _estimate_lines(doc["analysis"], unit)]
    lines.append("SimPy side:")
    lines += ["  " + s for s in _estimate_lines(doc["simulation"], unit)]
    sp = comp.get("sample_path", {})
    if sp:
        diff = sp.get("max_relative_difference")
        lines.append(f"sample paths   {'identical' if sp.get('identical') else 'DIFFERENT'}: "
                     f"{sp.get('firings_compared', 0):,} firings compared, largest relative "
                     f"difference {diff if diff is None else f'{diff:.1e}'}")
    return "\n".join(lines)


def _adjusted(test: dict[str, Any] | None) -> str:
    """A test's Holm-adjusted p-value (its raw one where none was adjusted), ✗ if rejected."""
    if not test:
        return "-"
    p = test.get("adjusted_p", test.get("p_value"))
    return ("-" if p is None else f"{p:.3g}") + (" ✗" if test.get("rejected") else "")


def trace_text(doc: dict[str, Any]) -> str:
    """Summary of ``cyclecheck trace``: the verdict and its reasons, then the figures."""
    unit = _unit(doc)
    lines = [f"verdict        {doc['verdict'].upper()}"]
    lines += [f"  - {r}" for r in doc.get("reasons", [])]
    lines += [f"  note: {n}" for n in doc.get("notes", [])]
    cycle = doc.get("cycle_time_test") or {}
    for comp in cycle.get("components", []):
        if "log" not in comp:
            continue
        lo, hi = comp["log_ci"]
        mlo, mhi = comp["model_ci"]
        change = comp.get("detectable_change")
        lines.append(f"cycle time     {_num(comp['log'])}{unit} [{_num(lo)}, {_num(hi)}] in the "
                     f"log, {_num(comp['model'])}{unit} [{_num(mlo)}, {_num(mhi)}] in the model"
                     f" ({comp['component']}; p (Holm) = {_adjusted(comp.get('test'))}"
                     + (f"; would catch a {100 * change:.2g} % change" if change else "") + ")")
    est = doc.get("cycle_time_from_log")
    if not cycle.get("components") and est is not None and math.isfinite(est):
        basis = doc.get("cycle_time_basis") or ""
        which = "lower bound" if basis.startswith("lower") else "model"
        lines.append(f"cycle time in log {_num(est)}{unit}; {which} {_num(doc.get('cycle_time'))}"
                     f"{unit}")
    rows = [r for r in doc.get("transitions", []) if "mean_test" in r]
    if rows:
        # the p-values the verdict reads: adjusted by Holm over the whole family of tests
        lines.append(f"{'durations':<14} {'observed mean':>14} {'model':>9} {'fit p':>8} "
                     f"{'mean p':>8} {'would catch':>12}   (p-values Holm-adjusted)")
        for r in rows:
            change = r.get("detectable_change")
            lines.append(f"  {r['id']:<12} {_num(r['observed_mean'], 5):>14} "
                         f"{_num(r['model_mean'], 5):>9} {_adjusted(r['fit_test']):>8} "
                         f"{_adjusted(r['mean_test']):>8} "
                         f"{'-' if change is None else f'{100 * change:.2g} % slower':>12}")
    skipped = doc.get("not_judged", [])
    if skipped:
        lines.append(f"not judged     {len(skipped)}: " + "; ".join(
            f"{n['id']} ({n['what']}: {n['reason']})" for n in skipped[:5])
            + (" ..." if len(skipped) > 5 else ""))
    return "\n".join(lines)


#: Points of a sweep printed on the terminal (the rest are in --json, --csv and the page).
SWEEP_ROWS = 200


def _circuit_or_dash(circuit: list[str] | None) -> str:
    return _circuit_text(circuit) if circuit else "-"


def sweep_text(doc: dict[str, Any]) -> str:
    """Summary of ``cyclecheck sweep``: one line per point."""
    unit = _unit(doc)
    targets = [v["target"] for v in doc["vary"]]
    points = doc["points"]
    header = ["point", *targets, f"cycle time ({unit.strip()})" if unit else "cycle time",
              "95 % CI", f"throughput per{unit or ' time unit'}",
              "critical circuit" + (" (random: of the mean durations; busiest server)"
                                    if any(p["status"] == "estimated" for p in points) else "")]
    rows = []
    for p in points[:SWEEP_ROWS]:
        values = [f"{p['values'][t]:g}" for t in targets]
        if p["cycle_time"] is None:
            rows.append([str(p["point"]), *values, "not live", "",
                         "0", "deadlock: " + _circuit_or_dash(p.get("deadlock"))])
            continue
        low, high = p["cycle_time_ci"]
        ci = "exact" if p["exact"] else f"[{_num(low, 5)}, {_num(high, 5)}]"
        top = p.get("busiest")
        where = _circuit_or_dash(p.get("critical_circuit"))
        if top:
            where += f"; busiest {top['transition']} ({100 * top['utilization']:.0f} % busy)"
        rows.append([str(p["point"]), *values, _num(p["cycle_time"]), ci,
                     _num(p["throughput"], 4), where])
    widths = [max(len(r[i]) for r in [header, *rows]) for i in range(len(header))]
    lines = [f"{doc['model']['name']}: sweep of {len(points)} points"]
    lines += ["  ".join(cell.ljust(w) for cell, w in zip(row, widths, strict=True)).rstrip()
              for row in [header, *rows]]
    if len(points) > SWEEP_ROWS:
        lines.append(f"... {len(points) - SWEEP_ROWS} more points (--json, --csv, --report)")
    best = doc.get("best_point")
    if best is not None:
        p = points[best]
        values = ", ".join(f"{t} = {p['values'][t]:g}" for t in targets)
        lines.append(f"shortest cycle time {_num(p['cycle_time'])}{unit} at point {best} "
                     f"({values})")
    if doc.get("common_random_numbers"):
        lines.append("random points share their draws (common random numbers): differences "
                     "between neighbours are in --json under \"differences\"")
    lines += [f"note: {n}" for n in doc.get("notes") or []]
    return "\n".join(lines)
