r"""Model files: read and check a timed event graph written in TOML (and CSV tables).

Schema
------
.. code-block:: toml

    [model]
    name = "Packaging cell"        # required
    time_unit = "s"                # optional
    description = "..."            # optional
    transitions_csv = "t.csv"      # optional, relative to this file
    places_csv = "p.csv"           # optional, relative to this file

    [[transitions]]
    id = "fill"                    # required, unique
    label = "Filler"               # optional
    duration = 12.0                # optional, default 0: a number or a distribution

    [[places]]
    from = "fill"                  # required, a transition id
    to = "cap"                     # required, a transition id
    tokens = 0                     # optional, default 0, integer >= 0
    hold = 1.5                     # optional, default 0: a number or a distribution
    label = "conveyor"             # optional

A distribution is a table such as ``{ dist = "gamma", mean = 3, cv = 0.5 }`` or the same text
as in a CSV cell, ``"gamma(mean=3, cv=0.5)"`` (see :mod:`cyclecheck.simulate.durations`).

CSV tables
----------
``transitions_csv`` and ``places_csv`` name CSV tables with the same fields as columns (see
:mod:`cyclecheck.simulate.tables` for the columns and the cell syntax).

Order and numbering
-------------------
Transitions are numbered from 0: the ``[[transitions]]`` entries in file order, then the rows of
``transitions_csv``; places likewise. This index is the one of the result documents and the
review page. Messages name a place by its position in its file *and* by that index: a TOML
place by its rank among the ``[[places]]`` entries counted from 1, e.g. ``place 3 (fill -> cap,
index 2)``, a CSV row by its line, e.g. ``line 12 (place fill -> cap, index 10)``. A transition
is named by its id, ``transition "cap"`` (``transition 3 (index 2)`` when it has none).

Checks
------
:func:`load_model` checks everything later code relies on and raises :class:`ModelError` (file,
item, rule) otherwise: unreadable, binary or non-UTF-8 files, TOML syntax, unknown keys and
columns (with the closest known name, case ignored), CSV lines with more or fewer fields than
the header, missing or duplicate ids (with where the id was first defined), places naming unknown
transitions, numbers that are negative, NaN, infinite or (tokens) not integers, bad
distributions, a model without transitions, a transition without an input place, and a circuit
without a token. The CSV path is vectorized with pyarrow (see
:mod:`cyclecheck.simulate.tables`): no Python loop runs per row.
"""

from __future__ import annotations

import hashlib
import math
import os
import re
import tomllib
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from functools import cached_property
from pathlib import Path
from typing import Any

import numpy as np

from ..algebra.eventgraph import MAX_TOKENS, EventGraph, check_live
from ..algebra.exceptions import NotLive, Unfed
from .durations import Sampler, SpecTable, parse_spec
from .errors import ArgumentError, ModelError, did_you_mean, shown
from .tables import (
    _csv_places,
    _csv_transitions,
    _read_file,
    _Rows,
    all_empty,
    arrow_call,
    arrow_compute,
    cell,
    chunks,
    numeric,
    string_array,
    write_csv_model,
)

__all__ = ["Model", "load_model", "write_csv_model"]  # write_csv_model lives in .tables

TOP_KEYS = ("model", "transitions", "places")
MODEL_KEYS = ("name", "time_unit", "description", "transitions_csv", "places_csv")
TRANSITION_KEYS = ("id", "label", "duration")
PLACE_KEYS = ("from", "to", "tokens", "hold", "label")
_SUGGEST_LIMIT = 100_000  # difflib over more ids would make an error message slow


@dataclass(frozen=True, eq=False)
class Model:
    """A checked timed event graph with its specs, as read from a model file.

    Attributes
    ----------
    name, time_unit, description : str
    path : pathlib.Path or None
        The TOML file.
    transition_ids, transition_labels : tuple of str, length n
        Labels are ``""`` where none was given.
    source, target, tokens : ndarray of int64, shape (m,)
        Input transition, output transition and initial marking of each place (read-only).
    place_labels : tuple of str, length m
    durations, holds : SpecTable
        The duration spec of each transition and the hold spec of each place.
    sha256 : str
        Digest of the sha256 digests of the TOML file and its CSV tables, in that order.
    sources : tuple of (str, str)
        Each file read and its own sha256.
    """

    name: str
    time_unit: str
    description: str
    path: Path | None
    transition_ids: tuple[str, ...]
    transition_labels: tuple[str, ...]
    source: np.ndarray
    target: np.ndarray
    tokens: np.ndarray
    place_labels: tuple[str, ...]
    durations: SpecTable
    holds: SpecTable
    sha256: str = ""
    sources: tuple[tuple[str, str], ...] = ()

    @property
    def n_transitions(self) -> int:
        return len(self.transition_ids)

    @property
    def n_places(self) -> int:
        return int(self.source.shape[0])

    @property
    def is_random(self) -> bool:
        """True when some duration or hold is random."""
        return self.durations.is_random or self.holds.is_random

    @cached_property
    def _mean_graph(self) -> EventGraph:
        return EventGraph(self.durations.means, self.source, self.target, self.tokens,
                          self.holds.means, names=self.transition_ids)

    def graph(self, values: str = "mean") -> EventGraph:
        """The event graph with fixed numbers: each duration and hold replaced by its mean.

        Transition names are the ids. ``values`` must be ``"mean"`` (the only choice so far).
        """
        if values != "mean":
            raise ArgumentError(f'values must be "mean", got {values!r}')
        return self._mean_graph

    def sampler(self, seed: int | None, replication: int = 0) -> Sampler:
        """The :class:`Sampler` of this model for one replication."""
        return Sampler(self.durations, self.holds, seed, replication)

    @cached_property
    def _index(self) -> dict[str, int]:
        return {t: i for i, t in enumerate(self.transition_ids)}

    def transition_index(self, transition_id: str) -> int:
        """Index of a transition id (KeyError if unknown)."""
        return self._index[transition_id]

    def transition_name(self, t: int) -> str:
        """The label of transition ``t``, or its id when it has no label."""
        return self.transition_labels[t] or self.transition_ids[t]

    def place_name(self, p: int) -> str:
        """The label of place ``p``, or ``"from -> to"`` when it has no label."""
        return self.place_labels[p] or (
            f"{self.transition_ids[self.source[p]]} -> {self.transition_ids[self.target[p]]}"
        )


# --------------------------------------------------------------------------- TOML text and fields


def _toml(path: Path, text: str) -> dict[str, Any]:
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        msg = str(exc)
        m = re.fullmatch(r"(.*) \(at line (\d+), column (\d+)\)", msg, re.S)
        if m:
            item, msg = f"line {m.group(2)}, column {m.group(3)}", m.group(1)
        elif msg.endswith(" (at end of document)"):
            item, msg = "end of file", msg.removesuffix(" (at end of document)")
        else:
            item = None
        raise ModelError(f"TOML syntax error: {msg}", file=path, item=item) from None


def _unknown_keys(table: dict[str, Any], allowed: Sequence[str], error: Any) -> None:
    for key in table:
        if key not in allowed:
            raise error(f'unknown key "{key}"{did_you_mean(key, allowed)} '
                        f'(keys: {", ".join(allowed)})')


def _text(table: dict[str, Any], key: str, error: Any, *, required: bool = False) -> str:
    if key not in table:
        if required:
            raise error(f'missing {key} = "..."')
        return ""
    value = table[key]
    if not isinstance(value, str):
        raise error(f"{key} must be a string, got {shown(value)}")
    value = value.strip()
    if required and not value:
        raise error(f"{key} must not be empty")
    return value


def _tokens(value: object, error: Any) -> int:
    ok = (not isinstance(value, bool) and isinstance(value, (int, float))
          and math.isfinite(value) and value == int(value) and 0 <= value <= MAX_TOKENS)
    if not ok:
        raise error(f"tokens must be an integer >= 0, got {shown(value)}")
    return int(value)  # type: ignore[arg-type]


# --------------------------------------------------------------------------- TOML entries


def _raiser(file: Path, item: str) -> Callable[[str], ModelError]:
    return lambda rule: ModelError(rule, file=file, item=item)


def _entries(entries: object, file: Path, key: str) -> list[dict[str, Any]]:
    if not isinstance(entries, list) or not all(isinstance(e, dict) for e in entries):
        raise ModelError(f"must be an array of tables: write [[{key}]] above each one",
                         file=file, item=key)
    return entries


def _toml_transitions(entries: object, file: Path) -> _Rows:
    ids, labels, specs = [], [], []
    for i, entry in enumerate(_entries(entries, file, "transitions")):
        tid = entry.get("id")
        named = isinstance(tid, str) and tid.strip()
        error = _raiser(file, f'transition "{tid.strip()}"' if named
                        else f"transition {i + 1} (index {i})")
        _unknown_keys(entry, TRANSITION_KEYS, error)
        ids.append(_text(entry, "id", error, required=True))
        labels.append(_text(entry, "label", error))
        specs.append(parse_spec(entry.get("duration", 0.0), item=f'transition "{ids[-1]}"',
                                file=file, key="duration"))
    return _Rows(file, _objects(ids), labels=_objects(labels), specs=SpecTable.from_specs(specs))


def _toml_places(entries: object, file: Path) -> _Rows:
    src, dst, tokens, labels, specs = [], [], [], [], []
    for i, entry in enumerate(_entries(entries, file, "places")):
        ends = [entry.get(k) for k in ("from", "to")]
        item = f"place {i + 1} (index {i})"
        if all(isinstance(e, str) for e in ends):
            item = f"place {i + 1} ({ends[0].strip()} -> {ends[1].strip()}, index {i})"
        error = _raiser(file, item)
        _unknown_keys(entry, PLACE_KEYS, error)
        src.append(_text(entry, "from", error, required=True))
        dst.append(_text(entry, "to", error, required=True))
        tokens.append(_tokens(entry.get("tokens", 0), error))
        labels.append(_text(entry, "label", error))
        specs.append(parse_spec(entry.get("hold", 0.0), item=item, file=file, key="hold"))
    return _Rows(file, _objects(src), _objects(dst), np.array(tokens, dtype=np.int64),
                 _objects(labels), SpecTable.from_specs(specs))


def _objects(values: list[str]) -> np.ndarray:
    return np.array(values, dtype=object) if values else np.zeros(0, dtype=object)


# --------------------------------------------------------------------------- the whole model


def _part(parts: list[_Rows], index: int) -> tuple[_Rows, int]:
    """The part holding element ``index`` of the concatenated parts, and its row there."""
    for rows in parts:
        if index < len(rows.ids):
            return rows, index
        index -= len(rows.ids)
    raise IndexError(index)


def _locate(parts: list[_Rows], index: int, rule: str) -> ModelError:
    """The error for element ``index`` of the concatenated parts, located in its own file."""
    rows, row = _part(parts, index)
    return ModelError(rule, file=rows.file, item=rows.item(row))


def _circuit_text(ids: Sequence[str]) -> str:
    walk = [*ids, ids[0]]
    if len(walk) > 12:
        walk = [*walk[:10], f"... ({len(ids)} transitions) ...", walk[-1]]
    return " -> ".join(walk)


def _lookup(ids: Any, wanted: Any) -> np.ndarray:
    """Index of each wanted id in ``ids`` (unique), -1 where unknown.

    Numpy object arrays (TOML models) go through a dict; Arrow string arrays (CSV tables)
    through one hashing pass in Arrow (``index_in``). CSV cells keep trailing blanks (stripping
    10^6 cells costs more than the rest of the check), so the cells not found are stripped
    and looked up once more.
    """
    if isinstance(ids, np.ndarray):
        index = {t: i for i, t in enumerate(ids.tolist())}
        return np.array([index.get(t, -1) for t in wanted.tolist()], dtype=np.int64)
    import pyarrow as pa

    value_set = ids.combine_chunks() if isinstance(ids, pa.ChunkedArray) else ids
    options = arrow_compute().SetLookupOptions(value_set=value_set)

    def index_in(values: Any) -> np.ndarray:
        return numeric(arrow_call("index_in", values, options=options), fill=-1,
                       dtype=np.int64)

    found = index_in(wanted)
    missing = np.flatnonzero(found < 0)
    if missing.size:
        # from buffers: pa.array of a numpy array imports pandas
        rows = np.ascontiguousarray(missing, dtype=np.int64)
        picks = pa.Array.from_buffers(pa.int64(), rows.size, [None, pa.py_buffer(rows)])
        retry = arrow_call("take", wanted, picks)
        found[missing] = index_in(arrow_call("utf8_trim_whitespace", retry))
    return found


def _first_duplicate(ids: Any) -> tuple[int, int] | None:
    if isinstance(ids, np.ndarray):
        seen: dict[str, int] = {}
        for j, t in enumerate(ids.tolist()):
            if t in seen:
                return seen[t], j
            seen[t] = j
        return None
    if len(arrow_call("unique", ids)) == len(ids):
        return None
    import pandas as pd

    values = ids.to_numpy(zero_copy_only=False)  # a duplicate to report: the slow way is fine
    j = int(np.argmax(pd.Index(values).duplicated()))
    return int(np.flatnonzero(values == values[j])[0]), j


def _joined_text(parts: list[Any], arrow: bool) -> Any:
    """Text columns of several parts one after the other: a chunked Arrow array when
    ``arrow`` (the chunks of the parts, not copied)."""
    if not arrow:
        return np.concatenate(parts) if parts else np.zeros(0, dtype=object)
    import pyarrow as pa

    arrays = [a for p in parts
              for a in ([string_array(p.tolist())] if isinstance(p, np.ndarray) else chunks(p))]
    return pa.chunked_array(arrays, type=pa.string())


def _strings(column: Any) -> tuple[str, ...]:
    """A text column as a tuple of str (a column of empty labels without a loop)."""
    if isinstance(column, np.ndarray):
        return tuple(column.tolist())
    if all_empty(column):
        return ("",) * len(column)
    return tuple(column.to_pylist())


def load_model(path: str | os.PathLike[str]) -> Model:
    """Read and check a model file (and the CSV tables it names).

    Parameters
    ----------
    path : str or path-like
        The TOML model file.

    Returns
    -------
    Model
        A model that later code can trust: ids unique, places between known transitions,
        numbers finite and >= 0, every transition fed by a place, every circuit marked.

    Raises
    ------
    ModelError
        For any bad input; ``str()`` names the file, the item and the rule. No other exception
        escapes for bad input.
    """
    path = Path(path)
    toml_bytes, text = _read_file(path, "TOML model file")
    doc = _toml(path, text)

    def error(rule: str, item: str | None = None) -> ModelError:
        return ModelError(rule, file=path, item=item)

    _unknown_keys(doc, TOP_KEYS, lambda r: error(r, "top level"))
    if "model" not in doc:
        raise error('missing: the file needs a [model] table with name = "..."', "[model]")
    meta = doc["model"]
    if not isinstance(meta, dict):
        raise error("must be a table: write [model] on a line of its own", "model")
    _unknown_keys(meta, MODEL_KEYS, lambda r: error(r, "[model]"))
    field = {k: _text(meta, k, lambda r: error(r, "[model]"), required=k == "name")
             for k in MODEL_KEYS}

    trows, prows = [], []
    if "transitions" in doc:
        trows.append(_toml_transitions(doc["transitions"], path))
    if "places" in doc:
        prows.append(_toml_places(doc["places"], path))
    if field["transitions_csv"]:
        trows.append(_csv_transitions(path.parent / field["transitions_csv"], path,
                                      first=sum(len(r.ids) for r in trows)))
    if field["places_csv"]:
        prows.append(_csv_places(path.parent / field["places_csv"], path,
                                 first=sum(len(r.ids) for r in prows)))
    arrow = any(r.line is not None for r in trows + prows)  # pyarrow is loaded anyway

    def joined(name: str, parts: list[_Rows], dtype: Any = object) -> np.ndarray:
        arrays = [getattr(r, name) for r in parts]
        return np.concatenate(arrays) if arrays else np.zeros(0, dtype=dtype)

    ids = _joined_text([r.ids for r in trows], arrow)
    if len(ids) == 0:
        raise error("the model has no transitions: add [[transitions]] entries or name a "
                    "transitions_csv in [model]")
    dup = _first_duplicate(ids)
    if dup is not None:
        (rows_a, a), (rows_b, b) = _part(trows, dup[0]), _part(trows, dup[1])
        where = "the file" if rows_a.file == rows_b.file else str(rows_a.file)
        again = f", again {rows_b.position(b)}" if rows_b.line is None else ""
        raise _locate(trows, dup[1], f'duplicate transition id "{cell(ids, dup[1])}": first '
                                     f"defined {rows_a.position(a)} of {where}{again}")
    wanted = {key: _joined_text([getattr(r, name) for r in prows], arrow)
              for key, name in (("from", "ids"), ("to", "dst"))}
    m = len(wanted["from"])
    found = _lookup(ids, _joined_text([wanted["from"], wanted["to"]], arrow))  # both ends at once
    found.setflags(write=False)
    ends = [found[:m], found[m:]]
    for key, end in zip(wanted, ends, strict=True):
        unknown = np.flatnonzero(end < 0)
        if unknown.size:
            p = int(unknown[0])
            names = ids.tolist() if isinstance(ids, np.ndarray) else ids.to_pylist()
            word = cell(wanted[key], p)
            hint = did_you_mean(word, names) if len(ids) <= _SUGGEST_LIMIT else ""
            more = f" ({unknown.size - 1} more places like this)" if unknown.size > 1 else ""
            raise _locate(prows, p, f'{key} = "{word}" is not a transition id{hint}{more}')
    files = [(path, toml_bytes)] + [(r.file, r.data) for r in trows + prows if r.line]
    digests = [hashlib.sha256(data).digest() for _, data in files]  # each file hashed once
    model = Model(
        name=field["name"],
        time_unit=field["time_unit"],
        description=field["description"],
        path=path,
        transition_ids=_strings(ids),
        transition_labels=_strings(_joined_text([r.labels for r in trows], arrow)),
        source=_frozen(ends[0]),
        target=_frozen(ends[1]),
        tokens=_frozen(joined("tokens", prows, np.int64)),
        place_labels=_strings(_joined_text([r.labels for r in prows], arrow)),
        durations=SpecTable.concat([r.specs for r in trows if r.specs is not None]),
        holds=SpecTable.concat([r.specs for r in prows if r.specs is not None]),
        sha256=hashlib.sha256(b"".join(digests)).hexdigest(),
        sources=tuple((str(f), d.hex()) for (f, _), d in zip(files, digests, strict=True)),
    )
    try:
        check_live(model.graph())
    except Unfed as exc:
        t = exc.transitions[0]
        tid = model.transition_ids[t]
        more = (f" ({len(exc.transitions) - 1} more transitions like this)"
                if len(exc.transitions) > 1 else "")
        raise _locate(trows, t, f"has no input place: its firing rate is unbounded; add a "
                                f'self-loop place (from = "{tid}", to = "{tid}", tokens = 1) '
                                f"to make it a single server{more}") from None
    except NotLive as exc:
        names = [model.transition_ids[t] for t in exc.circuit]
        raise error("holds no token: deadlock, none of its transitions can ever fire; put a "
                    "token on one of its places", f"circuit {_circuit_text(names)}") from None
    return model


def _frozen(a: np.ndarray) -> np.ndarray:
    a = np.ascontiguousarray(a, dtype=np.int64)
    a.setflags(write=False)
    return a

