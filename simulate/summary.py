"""Readable text summaries of result documents, for the terminal."""

from __future__ import annotations

import math
from typing import Any

__all__ = ["analysis_text", "check_text", "simulation_text", "trace_text"]

#: Slack rows shown in a summary (the smallest non-zero ones: the near-critical elements).
TOP_SLACKS = 5


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
        lines.append(f"upper bound    {_num(bounds['upper'])}{unit}  (estimated: E Z(K)/K, "
                     "subadditive)")
    if side.get("firings_simulated"):
        lines.append(f"firings        {side['firings_simulated']:,} simulated")
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
    lines += _estimate_lines(doc, unit)
    by_t = doc["cycle_time_by_transition"]
    if doc.get("strongly_connected") is False:
        lines.append("not strongly connected: cycle times differ by transition")
        shown = sorted(by_t.items(), key=lambda kv: -kv[1])[:TOP_SLACKS]
        lines += [f"  {tid:<20} {_num(v)}{unit}" for tid, v in shown]
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
    cert = doc.get("certificate")
    if cert:
        lines.append(("certificate    checked: " if cert["checked"] else "certificate    FAILED: ")
                     + f"residual {cert['eigen_residual']:.1e}")
    crit = doc.get("criticality", {}) or {}
    if crit.get("transitions"):
        top = sorted(crit["transitions"].items(), key=lambda kv: -kv[1])[:TOP_SLACKS]
        lines.append("criticality under variability (share of the downstream firings whose "
                     "start it set):")
        lines += [f"  {tid:<20} {100 * v:.1f} %" for tid, v in top]
    return "\n".join(lines)


def simulation_text(doc: dict[str, Any]) -> str:
    """Summary of ``cyclecheck simulate``."""
    unit = _unit(doc)
    model = doc.get("model", {})
    lines = [f"{model.get('name', 'model')}: SimPy simulation"]
    lines += _estimate_lines(doc, unit)
    util = doc.get("utilization") or {}
    if util:
        lines.append("utilization:")
        lines += [f"  {tid:<20} {100 * u:.1f} %" for tid, u in
                  sorted(util.items(), key=lambda kv: -kv[1])[:TOP_SLACKS]]
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
                     f" ({comp['component']}; p = {comp['p_value']:.3g}"
                     + (f"; would catch a {100 * change:.2g} % change" if change else "") + ")")
    est = doc.get("cycle_time_from_log")
    if not cycle.get("components") and est is not None and math.isfinite(est):
        basis = doc.get("cycle_time_basis") or ""
        which = "lower bound" if basis.startswith("lower") else "model"
        lines.append(f"cycle time in log {_num(est)}{unit}; {which} {_num(doc.get('cycle_time'))}"
                     f"{unit}")
    rows = [r for r in doc.get("transitions", []) if "mean_test" in r]
    if rows:
        lines.append(f"{'durations':<14} {'observed mean':>14} {'model':>9} {'fit p':>8} "
                     f"{'mean p':>8} {'would catch':>12}")
        for r in rows:
            change = r.get("detectable_change")
            lines.append(f"  {r['id']:<12} {_num(r['observed_mean'], 5):>14} "
                         f"{_num(r['model_mean'], 5):>9} {r['fit_test']['p_value']:>8.3g} "
                         f"{r['mean_test']['p_value']:>8.3g} "
                         f"{'-' if change is None else f'{100 * change:.2g} % slower':>12}")
    skipped = doc.get("not_judged", [])
    if skipped:
        lines.append(f"not judged     {len(skipped)}: " + "; ".join(
            f"{n['id']} ({n['what']}: {n['reason']})" for n in skipped[:5])
            + (" ..." if len(skipped) > 5 else ""))
    return "\n".join(lines)
