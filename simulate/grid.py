"""The grid of a sweep: targets, value lists, and the model of each point.

A sweep varies numbers of a model (``cyclecheck sweep MODEL --vary TARGET=VALUES``). This module
reads what to vary and builds the model of every point of the grid from the base model by
replacing specs (a duration, a hold, a marking); no file is written.

Targets
-------
========================  ==================================================================
``TRANSITION.duration``   the firing duration, set to a fixed number (a law is replaced)
``TRANSITION.PARAM``      one parameter of the duration's law (``press.mean``, ``press.cv``);
                          the other parameters are kept (a gamma's mean changes, its cv stays)
``FROM->TO.tokens``       the initial marking of a place (an integer >= 0)
``FROM->TO.hold``         the holding time of a place, set to a fixed number
``FROM->TO.PARAM``        one parameter of the hold's law
========================  ==================================================================

A place's label may stand for ``FROM->TO`` (``"kanban cards.tokens"``), and must when two
places join the same transitions. A fixed duration has the one parameter ``value`` (the same as
``.duration``).

Values
------
``a:b`` the integers from a to b inclusive; ``a:b:n`` n evenly spaced values from a to b
(numpy.linspace); ``v1,v2,...`` a list; a single number is a list of one. Every value is checked
as a model file's value would be (durations and holds from 0 to 1e100, tokens integers from 0 to
2^53, a law's own rules such as cv at most 100), and the message names the target.
"""

from __future__ import annotations

import dataclasses
import itertools
import math
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..algebra.eventgraph import MAX_TOKENS
from .durations import MAX_VALUE, SpecTable, parse_spec
from .errors import ModelError, did_you_mean
from .laws import Distribution, Fixed
from .modelfile import Model

__all__ = ["MAX_POINTS", "Grid", "Target", "make_grid", "parse_target", "parse_values",
           "point_model"]

#: Most points of one sweep (a grid of 10^4 points is already a large design of experiments).
MAX_POINTS = 10_000
#: Targets listed in a message about a bad target (the rest are counted).
LISTED = 24
#: Parameters that are not numbers and cannot be swept.
NOT_NUMBERS = frozenset({"truncate", "values"})


@dataclass(frozen=True)
class Target:
    """One varied number of a model.

    Attributes
    ----------
    text : str
        As the user wrote it (``"press.mean"``); the key of the point values in the document.
    element : {"transition", "place"}
    index : int
        Index of the transition or place.
    field : str
        ``"duration"``, ``"hold"``, ``"tokens"`` or the name of a parameter of the law.
    name : str
        The element as messages name it (``transition "press"``, ``place weld -> cut``).
    """

    text: str
    element: str
    index: int
    field: str
    name: str

    @property
    def is_tokens(self) -> bool:
        return self.field == "tokens"


def _place_key(model: Model, p: int) -> str:
    return f"{model.transition_ids[model.source[p]]}->{model.transition_ids[model.target[p]]}"


def _law_fields(law: Distribution) -> list[str]:
    return [k for k in law.params() if k not in NOT_NUMBERS]


def valid_targets(model: Model) -> list[str]:
    """The targets of a model, as a message lists them."""
    out = []
    for t, tid in enumerate(model.transition_ids):
        law = model.durations[t]
        fields = ["duration"] + ([] if isinstance(law, Fixed) else _law_fields(law))
        out += [f"{tid}.{f}" for f in fields]
    for p in range(model.n_places):
        law = model.holds[p]
        name = model.place_labels[p] or _place_key(model, p)
        fields = ["tokens", "hold"] + ([] if isinstance(law, Fixed) else _law_fields(law))
        out += [f"{name}.{f}" for f in fields]
    return out


def _bad(text: str, rule: str, model: Model) -> ModelError:
    targets = valid_targets(model)
    shown = ", ".join(targets[:LISTED])
    more = f" and {len(targets) - LISTED} more" if len(targets) > LISTED else ""
    return ModelError(f"{rule}; targets of this model: {shown}{more}", file=model.path,
                      item=f"--vary {text}")


def _find_place(model: Model, head: str, text: str) -> int:
    if "->" in head:
        src, _, dst = head.partition("->")
        key = f"{src.strip()}->{dst.strip()}"
        found = [p for p in range(model.n_places) if _place_key(model, p) == key]
        if len(found) > 1:
            labels = [model.place_labels[p] for p in found]
            raise _bad(text, f"{len(found)} places join {key}: name one by its label "
                       f"({', '.join(repr(x) for x in labels if x) or 'give them labels'})",
                       model)
    else:
        found = [p for p in range(model.n_places) if model.place_labels[p] == head]
        if len(found) > 1:
            raise _bad(text, f'{len(found)} places have the label "{head}"', model)
    if not found:
        names = [*model.transition_ids, *(x for x in model.place_labels if x),
                 *(_place_key(model, p) for p in range(model.n_places))]
        what = "place" if "->" in head else "transition or place"
        raise _bad(text, f'no {what} "{head}"{did_you_mean(head, names)}', model)
    return found[0]


def parse_target(text: str, model: Model) -> Target:
    """Read ``TRANSITION.FIELD`` or ``PLACE.FIELD`` (see the module docstring).

    Raises
    ------
    ModelError
        Naming the target and listing the valid ones: an unknown element, a field the element
        does not have, a parameter its law does not have.
    """
    if not isinstance(text, str) or "." not in text.strip(". "):
        raise _bad(str(text), "a target is ELEMENT.FIELD, such as press.mean or "
                   "a->b.tokens", model)
    text = text.strip()
    head, _, field = text.rpartition(".")
    head, field = head.strip(), field.strip()
    t = model.transition_index(head) if head in model.transition_ids else None
    if t is not None and field not in ("tokens", "hold"):
        law = model.durations[t]
        fields = ["duration", *_law_fields(law)]
        if field not in fields:
            what = (f"a fixed duration ({law.describe()})" if isinstance(law, Fixed)
                    else f"the duration {law.describe()}")
            rule = (f'transition "{head}" has {what}: it has no "{field}"'
                    f"{did_you_mean(field, fields)} (fields: {', '.join(fields)})")
            if field in ("tokens", "hold"):
                rule += "; tokens and hold belong to places, FROM->TO"
            raise _bad(text, rule, model)
        return Target(text, "transition", t, field, f'transition "{head}"')
    p = _find_place(model, head, text)
    law = model.holds[p]
    fields = ["tokens", "hold", *_law_fields(law)]
    name = f"place {model.place_name(p)}"
    if field not in fields:
        raise _bad(text, f"{name} (hold {law.describe()}) has no \"{field}\""
                   f"{did_you_mean(field, fields)} (fields: {', '.join(fields)})", model)
    return Target(text, "place", p, field, name)


def _number(word: str, text: str) -> int | float:
    word = word.strip()
    try:
        return int(word)
    except ValueError:
        pass
    try:
        x = float(word)
    except ValueError:
        raise ModelError(f'"{word}" is not a number; values are a:b (integers), a:b:n '
                         "(n evenly spaced) or v1,v2,...", item=f"--vary {text}") from None
    if not math.isfinite(x):
        raise ModelError(f"values must be finite, got {word}", item=f"--vary {text}")
    return x


def parse_values(spec: str | float | Iterable[float], label: str = "") -> list[int | float]:
    """The values of ``a:b``, ``a:b:n``, ``v1,v2,...`` or of a sequence of numbers.

    Examples
    --------
    >>> parse_values("1:4"), parse_values("0:1:3"), parse_values("2.5,3")
    ([1, 2, 3, 4], [0.0, 0.5, 1.0], [2.5, 3])
    """
    text = f"{label}={spec}" if label else str(spec)
    item = f"--vary {text}"
    if isinstance(spec, int | float) and not isinstance(spec, bool):
        spec = [spec]  # one number is a list of one
    if not isinstance(spec, str):
        values = [_number(str(v), text) for v in spec]
    elif ":" in spec:
        parts = spec.split(":")
        if len(parts) not in (2, 3):
            raise ModelError("a range is a:b or a:b:n", item=item)
        a, b = _number(parts[0], text), _number(parts[1], text)
        if len(parts) == 2:
            if not (isinstance(a, int) and isinstance(b, int)) or a > b:
                raise ModelError("a:b takes integers a <= b (the integers from a to b); for "
                                 "other numbers write a:b:n, n evenly spaced values",
                                 item=item)
            if b - a >= MAX_POINTS:
                raise ModelError(f"a:b gives {b - a + 1:,} values, more than a sweep may have "
                                 f"({MAX_POINTS:,})", item=item)
            values = list(range(a, b + 1))
        else:
            n = _number(parts[2], text)
            if not isinstance(n, int) or not 2 <= n <= MAX_POINTS:
                raise ModelError(f"in a:b:n, n is the number of values, an integer from 2 to "
                                 f"{MAX_POINTS:,}; got {parts[2].strip()}", item=item)
            values = [float(v) for v in np.linspace(a, b, n)]
    else:
        values = [_number(w, text) for w in spec.split(",")]
    if not values:
        raise ModelError("no values given", item=item)
    if len(set(values)) != len(values):
        raise ModelError("a value is given twice", item=item)
    return values


def _checked(target: Target, value: int | float, model: Model) -> int | float:
    """A value of the target checked as a model file's would be."""
    item = f"--vary {target.text}"
    if target.is_tokens:
        if float(value) != int(value) or not 0 <= value <= MAX_TOKENS:
            raise ModelError(f"{target.name}: tokens must be an integer from 0 to 2^53, got "
                             f"{value:g}", file=model.path, item=item)
        return int(value)
    if not 0 <= value <= MAX_VALUE:
        if target.field in ("duration", "hold", "value"):
            raise ModelError(f"{target.name}: {target.field} must be from 0 to 1e100 (so that "
                             f"sums of firing times and their squares stay finite), got "
                             f"{value:g}", file=model.path, item=item)
    table = model.durations if target.element == "transition" else model.holds
    _law(table, target, value, model)  # the law's own rules
    return value


def _law(table: SpecTable, target: Target, value: int | float, model: Model) -> Distribution:
    """The law of the target's element in ``table`` with the target set to ``value``."""
    old = table[target.index]
    if target.field in ("duration", "hold"):
        spec: Any = float(value)
    else:
        spec = {"dist": old.name, **old.params(), target.field: value}
    try:
        return parse_spec(spec, key=target.field)
    except ModelError as err:
        raise ModelError(f"{target.name}: {err.rule}", file=model.path,
                         item=f"--vary {target.text}={value:g}") from None


@dataclass(frozen=True)
class Grid:
    """The targets and their values; the points are their product, the last target varying
    fastest.

    Attributes
    ----------
    targets : tuple of Target
    values : tuple of tuple of number
        The values of each target, in the order given.
    """

    targets: tuple[Target, ...]
    values: tuple[tuple[int | float, ...], ...]

    @property
    def shape(self) -> tuple[int, ...]:
        return tuple(len(v) for v in self.values)

    def __len__(self) -> int:
        return math.prod(self.shape)

    def points(self) -> list[tuple[int | float, ...]]:
        """The values of every point, in point order."""
        return list(itertools.product(*self.values))

    def position(self, point: int) -> tuple[int, ...]:
        """The index of each target's value at a point."""
        return tuple(int(i) for i in np.unravel_index(point, self.shape))

    def neighbour(self, point: int, axis: int) -> int | None:
        """The point with the previous value of target ``axis`` and the same other values."""
        pos = list(self.position(point))
        if pos[axis] == 0:
            return None
        pos[axis] -= 1
        return int(np.ravel_multi_index(pos, self.shape))

    def describe(self) -> list[dict[str, Any]]:
        """The targets for the document: text, element, field and values."""
        return [{"target": t.text, "element": t.element, "index": t.index, "field": t.field,
                 "name": t.name, "values": list(v)}
                for t, v in zip(self.targets, self.values, strict=True)]


def make_grid(model: Model, vary: Mapping[str, Any] | Sequence[Any]) -> Grid:
    """The grid of ``vary``: ``{"press.mean": "10:14:5"}``, ``["press.mean=10:14:5"]`` or
    ``[("press.mean", [10, 12])]``; values as :func:`parse_values` reads them.

    Raises
    ------
    ModelError
        For a bad target or value (naming it), a target given twice, or a grid of more than
        :data:`MAX_POINTS` points.
    """
    pairs: list[tuple[str, Any]] = []
    items = vary.items() if isinstance(vary, Mapping) else [vary] if isinstance(vary, str) \
        else vary
    for entry in items:
        if isinstance(entry, str):
            if "=" not in entry:
                raise ModelError("write TARGET=VALUES, such as press.mean=10:14:5",
                                 item=f"--vary {entry}")
            target, _, values = entry.partition("=")
            pairs.append((target.strip(), values.strip()))
        elif isinstance(entry, Sequence) and len(entry) == 2:
            pairs.append((str(entry[0]).strip(), entry[1]))
        else:
            raise ModelError(f"cannot read {entry!r}: give TARGET=VALUES", item="--vary")
    if not pairs:
        raise ModelError("give at least one --vary TARGET=VALUES", item="--vary")
    targets, values, seen = [], [], {}
    for text, spec in pairs:
        target = parse_target(text, model)
        key = (target.element, target.index, target.field)
        if key in seen:
            raise ModelError(f"{target.name} {target.field} is varied twice (also as "
                             f"{seen[key]})", file=model.path, item=f"--vary {text}")
        seen[key] = text
        # A fixed value and a parameter of the law on one element cannot both hold at a
        # point: the fixed value would replace the law (the labels would lie), or the
        # parameter would find no law to change.
        whole = {"duration", "hold"}
        for (element, index, field), other in seen.items():
            if (element, index) == (target.element, target.index) and (
                    (field in whole) != (target.field in whole)) and not target.is_tokens \
                    and field != "tokens":
                fixed, param = (other, text) if field in whole else (text, other)
                raise ModelError(f"{target.name}: {fixed.split('=')[0]} sets a fixed value "
                                 f"and {param.split('=')[0]} a parameter of its law; vary "
                                 "one or the other", file=model.path, item=f"--vary {text}")
        targets.append(target)
        values.append(tuple(_checked(target, v, model) for v in parse_values(spec, text)))
    grid = Grid(tuple(targets), tuple(values))
    if len(grid) > MAX_POINTS:
        raise ModelError(f"the grid has {len(grid):,} points, more than a sweep may have "
                         f"({MAX_POINTS:,}): vary fewer values", item="--vary")
    return grid


def _with_spec(table: SpecTable, i: int, law: Distribution) -> SpecTable:
    """A copy of ``table`` with element ``i`` replaced (the arrays copied, not rebuilt)."""
    values, codes = table.values.copy(), table.codes.copy()
    laws = table.laws
    if isinstance(law, Fixed):
        values[i], codes[i] = law.value, -1
    else:
        laws = (*laws, law)
        codes[i] = len(laws) - 1
    return SpecTable(values, codes, laws)


def point_model(model: Model, grid: Grid, values: Sequence[int | float]) -> Model:
    """The base model with every target of the grid set to its value at one point.

    The model's liveness is not checked here (a point with a circuit emptied of tokens is
    reported as not live by the sweep, not refused).
    """
    durations, holds, tokens = model.durations, model.holds, model.tokens
    for target, value in zip(grid.targets, values, strict=True):
        if target.is_tokens:
            tokens = tokens.copy()
            tokens[target.index] = int(value)
            tokens.setflags(write=False)
        elif target.element == "transition":
            # targets of one element combine: each changes the law the previous ones left
            law = _law(durations, target, value, model)
            durations = _with_spec(durations, target.index, law)
        else:
            law = _law(holds, target, value, model)
            holds = _with_spec(holds, target.index, law)
    return dataclasses.replace(model, durations=durations, holds=holds, tokens=tokens)
