"""Markup shared by the parts of the review page: number formats, sections, tables, figures.

The leaf of the reports package: every other module of it may import this one, and this one
imports none of them, so the page, its sections and its notes never import one another in a
circle. Every string from a document goes through :func:`e` (:func:`html.escape`); numbers go
through :func:`fmt` and :func:`pct`.
"""

from __future__ import annotations

import html
import math
import re
from collections.abc import Mapping, Sequence
from typing import Any

__all__ = ["MAX_ROWS", "WIDE", "Figures", "circuit", "count", "e", "fmt", "get", "hourly",
           "interval", "is_random", "more", "pct", "section", "table", "time_unit", "unit_word",
           "with_unit"]

e = html.escape

#: Longest table on the page; longer lists are cut and the page says so.
MAX_ROWS = 40
#: Tables with more columns than this are set tighter (class ``wide`` in style.css).
WIDE = 6


def get(mapping: Any, key: str) -> Any:
    """``mapping[key]`` when it is a mapping holding it, else None."""
    return mapping.get(key) if isinstance(mapping, Mapping) else None


def time_unit(document: Mapping[str, Any]) -> str:
    """The model's time unit ("" when none)."""
    return str(document["model"].get("time_unit") or "")


def is_random(document: Mapping[str, Any]) -> bool:
    """Random durations: the model says so, or the analysis is not exact."""
    analysis = get(document, "analysis") or {}
    return bool(document["model"].get("is_random")) or analysis.get("exact") is False


#: Time units whose rates read better per hour (or per second), and the factor to get there.
_RATE_UNITS = {"s": ("hour", 3600.0), "sec": ("hour", 3600.0), "second": ("hour", 3600.0),
               "seconds": ("hour", 3600.0), "min": ("hour", 60.0), "minute": ("hour", 60.0),
               "minutes": ("hour", 60.0), "h": ("hour", 1.0), "hour": ("hour", 1.0),
               "hours": ("hour", 1.0), "ms": ("second", 1000.0)}


def hourly(rate: float, unit: str) -> tuple[float, str] | None:
    """A rate per time unit as a rate per hour (per second for ms), when the unit allows.

    >>> rate, per = hourly(1 / 17.375, "s")
    >>> fmt(rate), per
    ('207.2', 'hour')
    >>> hourly(2.0, "days") is None
    True
    """
    known = _RATE_UNITS.get(unit.strip().lower())
    if known is None:
        return None
    per, factor = known
    return rate * factor, per


#: Longest circuit written out in full; longer ones are cut in the middle.
MAX_CIRCUIT = 8


def circuit(ids: Sequence[Any]) -> str:
    """A circuit closed on its first transition, cut in the middle when long.

    >>> circuit(["a", "b"])
    'a → b → a'
    >>> circuit([f"s{i}" for i in range(1, 31)])
    's1 → s2 → s3 → s4 → … (and 24 more transitions) → s29 → s30 → s1'
    """
    names = [e(str(t)) for t in ids]
    if not names:
        return "–"
    if len(names) > MAX_CIRCUIT:
        left = len(names) - 6
        names = [*names[:4], f"… ({more(left, 'transition')})", *names[-2:]]
    return " → ".join([*names, e(str(ids[0]))])


def count(n: int, word: str, plural: str | None = None) -> str:
    """``3 firings``, ``1 firing``."""
    return f"{fmt(n)} {word if n == 1 else plural or word + 's'}"


def more(n: int, word: str, plural: str | None = None) -> str:
    """What a cut list leaves out, in the page's words: ``and 12 more transitions``."""
    return f"and {fmt(n)} more {word if n == 1 else plural or word + 's'}"


def with_unit(value: str, unit: str) -> str:
    """A formatted value followed by its unit, set small."""
    return f'{value}<span class="unit">\u00a0{e(unit)}</span>' if unit else value


class Figures:
    """Numbers the figures of one page in order."""

    def __init__(self) -> None:
        self.count = 0

    def wrap(self, name: str, title: str, svg: str, caption: str) -> str:
        self.count += 1
        return (f'<figure id="figure-{name}">\n'
                f'<p class="figure-title"><span class="figure-number">Figure {self.count}</span>'
                f" {title}</p>\n{svg}<figcaption>{caption}</figcaption>\n</figure>\n")


def section(name: str, heading: str, content: str) -> str:
    """A ``<section>`` with an id and its heading."""
    return (f'<section id="{name}" aria-labelledby="{name}-heading">\n'
            f'<h2 id="{name}-heading">{heading}</h2>\n{content}</section>\n')


def table(headers: Sequence[str], rows: Sequence[Sequence[str]], numeric: set[int],
           caption: str = "", compact: bool = False) -> str:
    """An HTML table; the columns whose positions are in ``numeric`` are right-aligned."""

    def cell(tag: str, i: int, text: str) -> str:
        return f'<{tag} class="num">{text}</{tag}>' if i in numeric else f"<{tag}>{text}</{tag}>"

    head = "".join(cell("th", i, h) for i, h in enumerate(headers))
    lines = ["<tr>" + "".join(cell("td", i, c) for i, c in enumerate(row)) + "</tr>"
             for row in rows]
    cap = f"<caption>{caption}</caption>" if caption else ""
    # Many columns: a smaller type and headers that wrap, so that the table fits the page.
    css = ' class="compact"' if compact else ' class="wide"' if len(headers) > WIDE else ""
    return (f'<div class="table-wrap"><table{css}>{cap}<thead><tr>{head}</tr></thead>\n'
            "<tbody>\n" + "\n".join(lines) + "\n</tbody></table></div>\n")


def fmt(value: Any, digits: int = 4) -> str:
    """Format a number for the page (``None`` becomes an en dash).

    Examples
    --------
    >>> fmt(13.5), fmt(1 / 13.5), fmt(12000), fmt(-0.25), fmt(123456.7), fmt(None)
    ('13.5', '0.07407', '12,000', '−0.25', '123,457', '–')
    """
    if value is None:
        return "–"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int):
        return f"{value:,}".replace("-", "−")
    x = float(value)
    if math.isnan(x):
        return "not a number"
    if math.isinf(x):
        return "∞" if x > 0 else "−∞"
    if x == 0:
        return "0"
    if abs(x) >= 10**digits:
        text = f"{round(x):,}"
    elif abs(x) < 1e-3:
        mantissa, exponent = f"{x:.{digits - 1}e}".split("e")
        mantissa = mantissa.rstrip("0").rstrip(".")
        sup = str(int(exponent)).translate(str.maketrans("-0123456789", "⁻⁰¹²³⁴⁵⁶⁷⁸⁹"))
        text = f"{mantissa}×10{sup}"
    else:
        text = f"{x:.{digits}g}"
        if abs(x) >= 1000 and "." not in text and "e" not in text:
            text = f"{int(text):,}"
    return text.replace("-", "−")


def interval(low: Any, high: Any, digits: int = 4) -> str:
    """Both ends of an interval with as many decimals as the more precise one needs.

    >>> interval(2.6, 2.66), interval(10.41, 10.83), interval(None, 3.0)
    ('2.60 – 2.66', '10.41 – 10.83', '– – 3')
    """
    ends = [fmt(low, digits), fmt(high, digits)]
    decimals = [len(t.split(".")[1]) if re.fullmatch(r"−?[\d,]+\.\d+", t) else 0 for t in ends]
    if all(re.fullmatch(r"−?[\d,]+(\.\d+)?", t) for t in ends) and len(set(decimals)) > 1:
        ends = [t + ("." if d == 0 else "") + "0" * (max(decimals) - d)
                for t, d in zip(ends, decimals, strict=True)]
    return f"{ends[0]} – {ends[1]}"


_UNIT_WORDS = {"s": "second", "sec": "second", "ms": "millisecond", "min": "minute",
               "h": "hour", "d": "day"}


def unit_word(unit: str) -> str:
    """The time unit as a word for prose: ``each minute``, ``each time unit``."""
    unit = unit.strip()
    return _UNIT_WORDS.get(unit, unit) or "time unit"


def pct(value: Any) -> str:
    """A fraction as a percentage with one decimal (``0.8889`` → ``88.9 %``)."""
    if value is None:
        return "–"
    return f"{100 * float(value):.1f}\u202f%".replace("-", "−")
