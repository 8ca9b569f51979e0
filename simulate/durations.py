r"""Random durations and holding times of a model: reading specs, storing them, drawing them.

Specs
-----
A duration or a hold is a number (a fixed value) or a distribution table, as written in a model
file. :func:`parse_spec` turns either into a :class:`~cyclecheck.simulate.laws.Distribution`
(the laws and their parameters are listed in :mod:`cyclecheck.simulate.laws`, whose names are
re-exported here), and :class:`SpecTable` keeps the specs of all the elements of one kind.

In a CSV cell, or as a TOML string, a distribution is written ``name(key=value, ...)`` with
TOML values, for example ``gamma(mean=3, cv=0.5)`` or ``empirical(values=[2, 3, 5])``; a plain
number is a fixed value. :meth:`Distribution.to_text` writes that form exactly.

Sampler
-------
Draws are indexed by (replication ``r``, kind, element ``e``, firing ``k >= 1``); kind 0 is a
transition duration, kind 1 a place hold. Firings come in blocks of :data:`BLOCK`: block
``b = (k - 1) // BLOCK`` of element ``e`` is one call of :meth:`Distribution.sample` of size
:data:`BLOCK` on ``Generator(PCG64(SeedSequence(seed, spawn_key=(r, kind, e, b))))``. The k-th
draw of an element is therefore the same number whatever the order of the requests, the
process or the machine. Changing :data:`BLOCK` or a distribution's sampling code changes the
numbers.

How the numbers are made, without changing them: building a SeedSequence and a PCG64 costs
about 40 µs, as much as drawing a few thousand values. The sampler instead derives the PCG64
states of many blocks at once (:func:`~cyclecheck.simulate.streams.pcg64_states`, the hashing
of SeedSequence and the seeding of PCG64 written out, checked against numpy in the tests) and sets
them on one reused generator (about 3 µs). A block is drawn only as far as firings are asked
for and continued later from the saved generator state: every law draws its values one after
the other from the stream, so a block drawn in pieces equals the block drawn at once (also
checked in the tests).
"""

from __future__ import annotations

import math
import os
import re
import tomllib
from collections import OrderedDict
from collections.abc import Iterable, Sequence
from typing import Any

import numpy as np

from .errors import ArgumentError, ModelError, did_you_mean, shown
from .laws import (
    DISTRIBUTIONS,
    Distribution,
    Empirical,
    Erlang,
    Exponential,
    Fixed,
    Gamma,
    Lognormal,
    Normal,
    Triangular,
    Uniform,
    Weibull,
)
from .streams import BlockStream, pcg64_states, state_of

__all__ = [  # the law classes are re-exported from .laws, where they live
    "BLOCK",
    "CACHE_BYTES",
    "DISTRIBUTIONS",
    "MAX_CV",
    "MAX_VALUE",
    "Distribution",
    "Empirical",
    "Erlang",
    "Exponential",
    "Fixed",
    "Gamma",
    "Lognormal",
    "Normal",
    "Sampler",
    "SpecTable",
    "Triangular",
    "Uniform",
    "Weibull",
    "parse_spec",
    "pcg64_states",
]  # pcg64_states is re-exported from .streams

BLOCK = 8192
"""Firings per block of draws. Setting up a block's generator (SeedSequence and PCG64, about
35 µs) costs as much as 2000 exponential draws: at 8192 it adds about 4 ns per draw, where 1024
added 35 ns and capped the vectorized recursion at about 13 million firings per second. A cached
block costs 64 KiB per element."""

MAX_VALUE = 1e100
"""Largest duration or hold a model may hold (and largest mean of a law). Firing times are sums
of up to ``n + m`` values per firing over up to 2^53 firings, and the statistics of an estimate
square them: for a graph of 10^8 elements, at 10^100 the sums stay below 10^125 and the squares
below 10^250, far from the float limit 1.8·10^308, where larger values would overflow."""

MAX_CV = 100.0
"""Largest coefficient of variation of a law given by its mean and cv (gamma, log-normal)."""

CACHE_BYTES = 128 * 2**20
"""Default memory budget of a :class:`Sampler`'s block cache."""

PathLike = str | os.PathLike[str]

_ALIASES = {"deterministic": "fixed"}
_CELL = re.compile(r"\s*([A-Za-z_][A-Za-z0-9_]*)\s*\((.*)\)\s*")


class _Reader:
    """Checks the parameters of one distribution table and reports errors in one voice."""

    def __init__(self, name: str, table: dict[str, Any], error: Any) -> None:
        self.name, self.table, self.error = name, table, error

    def number(self, key: str, *, positive: bool = False, hint: str = "") -> float:
        x = self.table[key]
        what = f"{self.name} {key} " if self.name else ""  # a plain number has no name
        if isinstance(x, bool) or not isinstance(x, (int, float)):
            raise self.error(f"{what}must be a number, got {shown(x)}")
        x = float(x)
        if not math.isfinite(x):
            raise self.error(f"{what}must be finite, got {shown(x)}")
        if positive and x <= 0:
            raise self.error(f"{what}must be > 0, got {shown(x)}{hint}")
        if x < 0:
            raise self.error(f"{what}must be >= 0, got {shown(x)}")
        if x > MAX_VALUE:
            raise self.error(f"{what}must be at most 1e100 (so that sums of firing times and "
                             f"their squares stay finite), got {shown(x)}")
        return x + 0.0  # no negative zero

    def spread(self, key: str) -> float:
        x = self.number(key, positive=True, hint=" (write a plain number for a fixed value)")
        if key == "cv" and x > MAX_CV:
            raise self.error(f"{self.name} cv must be at most {MAX_CV:g} (above it almost "
                             f"every draw is 0 and a few are huge), got {shown(x)}")
        return x


def _plain(x: float, error: Any) -> Fixed:
    return Fixed(_Reader("", {"value": x}, error).number("value"))


def _build(name: str, r: _Reader) -> Distribution:
    t = r.table
    if name == "fixed":
        return Fixed(r.number("value"))
    if name == "exponential":
        return Exponential(r.number("mean", positive=True))
    if name in ("gamma", "lognormal"):
        mean, cv = r.number("mean", positive=True), r.spread("cv")
        return Gamma(mean, cv) if name == "gamma" else Lognormal(mean, cv)
    if name == "erlang":
        k = t["k"]
        if isinstance(k, bool) or not isinstance(k, (int, float)) or k != int(k) or k < 1:
            raise r.error(f"erlang k must be an integer >= 1, got {shown(k)}")
        return Erlang(r.number("mean", positive=True), int(k))
    if name == "weibull":
        shape = r.number("shape", positive=True)
        if ("mean" in t) == ("scale" in t):
            raise r.error("weibull needs shape and exactly one of mean or scale")
        if shape < 0.05:  # near 0.012 Γ(1 + 2/shape) overflows; 0.05 keeps a wide margin
            raise r.error(f"weibull shape must be >= 0.05, got {shown(shape)}")
        g1 = math.lgamma(1 + 1 / shape)
        if "mean" in t:
            mean = r.number("mean", positive=True)
            return Weibull(shape, mean / math.exp(g1), mean, True)
        scale = r.number("scale", positive=True)
        return Weibull(shape, scale, scale * math.exp(g1), False)
    if name == "normal":
        return Normal(r.number("mean"), r.spread("sd"))
    if name == "uniform":
        low, high = r.number("low"), r.number("high")
        if low > high:
            raise r.error(f"uniform low must be <= high, got low={shown(low)}, "
                          f"high={shown(high)}")
        return Uniform(low, high)
    if name == "triangular":
        low, mode, high = r.number("low"), r.number("mode"), r.number("high")
        if low > high:
            raise r.error(f"triangular low must be <= high, got low={shown(low)}, "
                          f"high={shown(high)}")
        if not low <= mode <= high:
            raise r.error(f"triangular mode must lie in [low, high] = [{shown(low)}, "
                          f"{shown(high)}], got {shown(mode)}")
        return Triangular(low, mode, high)
    values = t["values"]
    if not isinstance(values, list) or not values:
        raise r.error(f"empirical values must be a non-empty list of numbers >= 0, "
                      f"got {shown(values)}")
    out = []
    for i, v in enumerate(values):
        if (isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v)
                or not 0 <= v <= MAX_VALUE):
            raise r.error(f"empirical values must be numbers from 0 to 1e100, got {shown(v)} "
                          f"at position {i + 1}")
        out.append(float(v) + 0.0)
    return Empirical(tuple(out))


def parse_spec(
    value: object,
    *,
    item: str | None = None,
    file: PathLike | None = None,
    key: str | None = None,
) -> Distribution:
    """Read a duration or hold as written in a model file.

    Parameters
    ----------
    value : number, dict or str
        A number >= 0 (a fixed value), a distribution table ``{"dist": ..., ...}``, or its cell
        text ``name(key=value, ...)``. A :class:`Distribution` is returned as it is.
    item, file : optional
        Where the value comes from, for the error message.
    key : str, optional
        The field name (``"duration"``, ``"hold"``), prefixed to the rule of an error.

    Raises
    ------
    ModelError
        If the value is not a valid spec; the rule says which rule is broken.
    """
    prefix = f"{key}: " if key else ""

    def error(rule: str) -> ModelError:
        return ModelError(prefix + rule, file=file, item=item)

    if isinstance(value, Distribution):
        return value
    if isinstance(value, bool):
        raise error(f"must be a number or a distribution, got {shown(value)}")
    if isinstance(value, (int, float, np.integer, np.floating)):
        return _plain(float(value), error)
    if isinstance(value, str):
        return _parse_text(value, error)
    if not isinstance(value, dict):
        raise error(f"must be a number or a distribution table, got {shown(value)}")
    table = dict(value)
    names = sorted(DISTRIBUTIONS)
    if "dist" not in table:
        raise error(f'a distribution table needs dist = "..." (one of {", ".join(names)})')
    name = table.pop("dist")
    if not isinstance(name, str):
        raise error(f"dist must be a string, got {shown(name)}")
    name = _ALIASES.get(name.strip().lower(), name.strip().lower())
    if name not in DISTRIBUTIONS:
        raise error(f'unknown distribution "{value["dist"]}"{did_you_mean(name, names)} '
                    f'(known: {", ".join(names)})')
    cls = DISTRIBUTIONS[name]
    allowed = cls.required + cls.optional
    for k in table:
        if k not in allowed:
            raise error(f'{name} has no parameter "{k}"{did_you_mean(k, allowed)} '
                        f'(parameters: {", ".join(allowed)})')
    if name == "normal" and not isinstance(table.get("truncate", False), bool):
        raise error(f"normal truncate must be true or false (a boolean), got "
                    f"{shown(table['truncate'])}")
    if name == "normal" and table.get("truncate") is not True:
        raise error("normal can go negative: add truncate = true (draws below 0 are redrawn), "
                    "or use gamma or lognormal")
    missing = [k for k in cls.required if k not in table]
    if missing:
        raise error(f"{name} needs {', '.join(cls.required)}: missing {', '.join(missing)}")
    law = _build(name, _Reader(name, table, error))
    # Each parameter is within its limits; the mean they make together must be too (a
    # truncated normal's mean exceeds its mu, a Weibull's its scale).
    if not law.mean <= MAX_VALUE:
        raise error(f"the mean of {law.describe()} is {law.mean:.3g}: it must be at most 1e100 "
                    "(so that sums of firing times and their squares stay finite)")
    return law


def _parse_text(text: str, error: Any) -> Distribution:
    s = text.strip()
    try:
        x = float(s)
    except ValueError:
        pass
    else:
        return _plain(x, error)
    m = _CELL.fullmatch(s)
    if m is None:
        raise error(f"must be a number or a distribution such as gamma(mean=3, cv=0.5), "
                    f"got {shown(text)}")
    try:
        params = tomllib.loads(f"v = {{{m.group(2)}}}")["v"]
    except tomllib.TOMLDecodeError:
        raise error(f"cannot read {shown(text)}: write name(key=value, ...), "
                    "e.g. gamma(mean=3, cv=0.5)") from None
    if "dist" in params:
        raise error(f'cannot read {shown(text)}: the name before "(" is the distribution')
    return _table(m.group(1), params, error)


def _table(name: str, params: dict[str, Any], error: Any) -> Distribution:
    try:
        return parse_spec({"dist": name, **params})
    except ModelError as exc:
        raise error(exc.rule) from None


class SpecTable:
    """The specs of every element of one kind (all transitions, or all places), stored compactly.

    A model with 10^6 places mostly holds plain numbers: they live in one float array, and only
    the elements with a law point into a short tuple of distinct laws.

    Parameters
    ----------
    values : array_like of float, shape (n,)
        Fixed value of each element (for an element with a law, its mean is stored instead).
    codes : array_like of int, shape (n,), optional
        ``-1`` for a fixed value, else an index into ``laws``. Default: all fixed.
    laws : sequence of Distribution, optional
        The distinct laws.

    Raises
    ------
    ArgumentError
        If the arrays disagree or a fixed value is negative, NaN or infinite.
    """

    __slots__ = ("_random", "codes", "laws", "values")

    def __init__(
        self,
        values: Sequence[float] | np.ndarray,
        codes: Sequence[int] | np.ndarray | None = None,
        laws: Sequence[Distribution] = (),
    ) -> None:
        vals = np.array(values, dtype=np.float64)
        if vals.ndim != 1:
            raise ArgumentError(f"values must be one-dimensional, got shape {vals.shape}")
        n = vals.shape[0]
        cods = np.full(n, -1, dtype=np.int32) if codes is None else np.array(codes, np.int32)
        if cods.shape != (n,):
            raise ArgumentError(f"codes must have shape ({n},), got {cods.shape}")
        self.laws = tuple(laws)
        if codes is not None and n and (cods.min() < -1 or cods.max() >= len(self.laws)):
            raise ArgumentError(f"codes must lie in -1..{len(self.laws) - 1}")
        if any(not isinstance(law, Distribution) for law in self.laws):
            raise ArgumentError("laws must be Distribution instances")
        if self.laws:
            has_law = cods >= 0
            vals[has_law] = np.array([law.mean for law in self.laws])[cods[has_law]]
            # A fixed law is stored as a plain number, so that equal models compare equal
            # whichever way they wrote their constants.
            keep = [not isinstance(law, Fixed) for law in self.laws]
            if not all(keep):
                remap = np.cumsum(keep, dtype=np.int32) - 1
                remap[~np.array(keep)] = -1
                cods = np.append(remap, np.int32(-1))[cods]  # code -1 picks the final -1
                self.laws = tuple(law for law, k in zip(self.laws, keep, strict=True) if k)
        if not np.all(np.isfinite(vals)) or (n and vals.min() < 0):
            raise ArgumentError("fixed values must be finite and >= 0")
        random_law = np.array([law.is_random for law in self.laws] + [False])
        if random_law.any():
            self._random = np.flatnonzero(random_law[cods])  # code -1 picks the final False
        else:  # no random law: no element to look at
            self._random = np.zeros(0, dtype=np.intp)
        for a in (vals, cods, self._random):
            a.setflags(write=False)
        self.values, self.codes = vals, cods

    @classmethod
    def from_specs(cls, specs: Iterable[Distribution | float]) -> SpecTable:
        """Build from one spec per element (numbers, laws or anything :func:`parse_spec` reads)."""
        values: list[float] = []
        codes: list[int] = []
        index: dict[Distribution, int] = {}
        for spec in specs:
            law = parse_spec(spec)
            if isinstance(law, Fixed):
                values.append(law.value)
                codes.append(-1)
            else:
                values.append(law.mean)
                codes.append(index.setdefault(law, len(index)))
        return cls(values, codes, tuple(index))

    @classmethod
    def coerce(cls, specs: SpecTable | Iterable[Distribution | float]) -> SpecTable:
        """``specs`` itself if it is a table, else :meth:`from_specs`."""
        return specs if isinstance(specs, SpecTable) else cls.from_specs(specs)

    @classmethod
    def concat(cls, tables: Sequence[SpecTable]) -> SpecTable:
        """The elements of ``tables`` one after the other (laws shared where equal)."""
        if len(tables) == 1 and len(set(tables[0].laws)) == len(tables[0].laws):
            return tables[0]  # what the loop below would build again: its laws are distinct
        index: dict[Distribution, int] = {}
        parts = []
        for t in tables:
            remap = np.array([index.setdefault(law, len(index)) for law in t.laws] + [-1],
                             dtype=np.int32)
            parts.append(remap[t.codes])  # code -1 picks the final -1
        values = np.concatenate([t.values for t in tables]) if tables else np.zeros(0)
        codes = np.concatenate(parts) if parts else np.zeros(0, np.int32)
        return cls(values, codes, tuple(index))

    def __len__(self) -> int:
        return int(self.values.shape[0])

    def __getitem__(self, i: int) -> Distribution:
        code = int(self.codes[i])
        return Fixed(float(self.values[i])) if code < 0 else self.laws[code]

    def __iter__(self) -> Any:
        return (self[i] for i in range(len(self)))

    def describe(self, stop: int | None = None) -> list[str]:
        """``self[i].describe()`` of the first ``stop`` elements (all by default), each law
        described once."""
        stop = len(self) if stop is None else min(stop, len(self))
        laws = [law.describe() for law in self.laws]
        return [laws[code] if code >= 0 else Fixed.text(value) for value, code in
                zip(self.values[:stop].tolist(), self.codes[:stop].tolist(), strict=True)]

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, SpecTable):
            return NotImplemented
        if len(self) != len(other) or not np.array_equal(self.values, other.values):
            return False
        mine = np.array([*range(len(self.laws)), -1])[self.codes]
        index = {law: i for i, law in enumerate(self.laws)}
        theirs = np.array([index.get(law, -2) for law in other.laws] + [-1])[other.codes]
        return bool(np.array_equal(mine, theirs))

    __hash__ = None  # type: ignore[assignment]

    def __repr__(self) -> str:
        return f"SpecTable(n={len(self)}, random={self.random_elements.size}, laws={self.laws})"

    @property
    def means(self) -> np.ndarray:
        """Mean of each element (its fixed value when it has no law)."""
        return self.values

    @property
    def variances(self) -> np.ndarray:
        """Variance of each element (0 for fixed values)."""
        var = np.array([law.variance for law in self.laws] + [0.0])
        return var[self.codes]

    @property
    def random_elements(self) -> np.ndarray:
        """Indices of the elements whose law is random."""
        return self._random

    @property
    def is_random(self) -> bool:
        """True when at least one element needs draws."""
        return bool(self._random.size)


TRANSITION, PLACE = 0, 1  # the "kind" of the spawn key

def _count(x: object, name: str, low: int) -> int:
    if isinstance(x, bool) or not isinstance(x, (int, np.integer)) or x < low:
        raise ArgumentError(f"{name} must be an integer >= {low}, got {x!r}")
    return int(x)


#: Least number of draws made in a block at first (see ``Sampler._drawn``).
_STEP = 1024


class Sampler:
    """The draws of one replication, indexed by element and firing number.

    Parameters
    ----------
    duration_specs, hold_specs : SpecTable or sequence of specs
        One spec per transition and one per place (numbers, laws, tables).
    seed : int or None
        Root of the streams. ``None`` takes fresh entropy from the operating system and keeps
        it in :attr:`seed`, so that the run can be repeated.
    replication : int, default 0
        Index of the replication; replications get independent streams.
    cache_bytes : int, default CACHE_BYTES
        Memory for cached blocks (one block per element, least recently used dropped first).
        The cache changes speed only, never the numbers.

    Notes
    -----
    Block ``b`` of element ``e`` of kind ``kind`` (0 transitions, 1 places) holds firings
    ``b·BLOCK + 1 .. (b + 1)·BLOCK`` and is drawn from
    ``Generator(PCG64(SeedSequence(seed, spawn_key=(replication, kind, e, b))))``. The global
    random state of numpy is never used.

    Examples
    --------
    >>> s = Sampler([{"dist": "exponential", "mean": 2.0}, 1.5], [0.0], seed=7)
    >>> bool(s.duration(0, 5, 3)[1] == s.duration(0, 6, 1)[0])
    True
    >>> s.duration(1, 1, 2).tolist()
    [1.5, 1.5]
    """

    def __init__(
        self,
        duration_specs: SpecTable | Iterable[Distribution | float],
        hold_specs: SpecTable | Iterable[Distribution | float],
        seed: int | None,
        replication: int = 0,
        *,
        cache_bytes: int = CACHE_BYTES,
    ) -> None:
        self.durations = SpecTable.coerce(duration_specs)
        self.holds = SpecTable.coerce(hold_specs)
        self.seed = (int(np.random.SeedSequence().entropy) if seed is None  # type: ignore[arg-type]
                     else _count(seed, "seed", 0))
        self.replication = _count(replication, "replication", 0)
        self._max_cached = max(1, _count(cache_bytes, "cache_bytes", 0) // (BLOCK * 8))
        # (kind, element) -> _Block; least recently used first
        self._cache: OrderedDict[tuple[int, int], BlockStream] = OrderedDict()
        self._bitgen: np.random.PCG64 | None = None
        self._gen: np.random.Generator | None = None
        self._prepared: dict[int, int] = {}  # kind -> block prepared for all its elements

    def __getstate__(self) -> dict[str, Any]:
        state = self.__dict__.copy()
        state["_cache"] = OrderedDict()  # blocks are cheap to redraw, costly to ship
        state["_bitgen"] = state["_gen"] = None
        state["_prepared"] = {}
        return state

    def __repr__(self) -> str:
        return (f"Sampler(n_transitions={self.n_transitions}, n_places={self.n_places}, "
                f"seed={self.seed}, replication={self.replication})")

    @property
    def n_transitions(self) -> int:
        return len(self.durations)

    @property
    def n_places(self) -> int:
        return len(self.holds)

    @property
    def is_random(self) -> bool:
        """True when some duration or hold is random."""
        return self.durations.is_random or self.holds.is_random

    def for_replication(self, replication: int) -> Sampler:
        """The sampler of another replication, same specs and seed."""
        return Sampler(self.durations, self.holds, self.seed, replication,
                       cache_bytes=self._max_cached * BLOCK * 8)

    def block(self, kind: int, element: int, b: int) -> np.ndarray:
        """Block ``b`` of draws of an element (read-only, shape ``(BLOCK,)``).

        ``kind`` is 0 for a transition duration, 1 for a place hold; firing ``k`` is entry
        ``(k - 1) % BLOCK`` of block ``(k - 1) // BLOCK``.
        """
        table = self.durations if kind == TRANSITION else self.holds
        if not table[element].is_random:
            arr = np.full(BLOCK, table.values[element])
        else:
            arr = self._drawn(kind, table, element, b, BLOCK).copy()
        arr.setflags(write=False)
        return arr

    def _prepare(self, kind: int, elements: Sequence[int], b: int) -> None:
        """Cache entries for block ``b`` of ``elements``, their generator states derived at
        once; entries already there are kept (and marked as recently used)."""
        missing = self._missing(kind, elements, b)
        if not missing:
            return
        big = max(self.replication, max(missing), b) >= 2**32
        if big:  # keys beyond 32 bits: numpy's own SeedSequence (never in practice)
            states = [state_of(np.random.PCG64(np.random.SeedSequence(
                self.seed, spawn_key=(self.replication, kind, e, b)))) for e in missing]
        else:
            keys = np.empty((len(missing), 4), dtype=np.uint64)
            keys[:, 0], keys[:, 1], keys[:, 2], keys[:, 3] = self.replication, kind, missing, b
            states = pcg64_states(self.seed, keys)
        self._install(kind, missing, b, states)

    def _missing(self, kind: int, elements: Sequence[int], b: int) -> list[int]:
        """The elements without a cache entry for block ``b``; the others are marked as
        recently used."""
        missing = []
        for e in elements:
            hit = self._cache.get((kind, e))
            if hit is not None and hit.b == b:
                self._cache.move_to_end((kind, e))
            else:
                missing.append(e)
        return missing

    def _install(self, kind: int, elements: Sequence[int], b: int,
                 states: Sequence[tuple[int, int]]) -> None:
        for e, st in zip(elements, states, strict=True):
            self._cache[(kind, e)] = BlockStream(b, st, BLOCK)
            self._cache.move_to_end((kind, e))
        while len(self._cache) > self._max_cached:
            self._cache.popitem(last=False)

    @staticmethod
    def prepare_together(samplers: Sequence[Sampler], kind: int, first: int) -> None:
        """Derive the generator states of the block holding firing ``first``, for every random
        element of every sampler (replications of one seed), in one vectorized pass.

        Speed only: :meth:`duration_block` and :meth:`hold_block` derive the states a
        sampler lacks themselves, with the same numbers; a run of a few replications of a
        small model would otherwise derive them a few keys at a time, at a fixed cost per call.
        """
        b = (_count(first, "first", 1) - 1) // BLOCK
        todo = []
        for s in samplers:
            table = s.durations if kind == TRANSITION else s.holds
            randoms = table.random_elements.tolist()
            if randoms and len(randoms) <= s._max_cached and s._prepared.get(kind) != b:
                todo.append((s, s._missing(kind, randoms, b)))
        rows = [(s.replication, kind, e, b) for s, missing in todo for e in missing]
        if len({s.seed for s, _ in todo}) != 1 or not rows or max(map(max, rows)) >= 2**32:
            return  # nothing to do, or not one seed, or keys for numpy's SeedSequence
        states = pcg64_states(todo[0][0].seed, np.array(rows, dtype=np.uint64))
        i = 0
        for s, missing in todo:
            s._install(kind, missing, b, states[i : i + len(missing)])
            s._prepared[kind] = b
            i += len(missing)

    def _drawn(self, kind: int, table: SpecTable, e: int, b: int, upto: int) -> np.ndarray:
        """Block ``b`` of element ``e`` drawn at least up to entry ``upto`` (a view of the
        cached buffer, valid until the next request)."""
        entry = self._cache.get((kind, e))
        if entry is None or entry.b != b:
            self._prepare(kind, [e], b)
            entry = self._cache[(kind, e)]
        else:
            self._cache.move_to_end((kind, e))
        if entry.filled < upto:
            if self._gen is None:
                self._bitgen = np.random.PCG64(0)
                self._gen = np.random.Generator(self._bitgen)
            assert self._bitgen is not None
            self._bitgen.state = entry.state
            # At least double what is drawn, so that a run asking firing after firing, or chunk
            # after chunk, switches generator states a few times per block, not every time.
            stop = min(BLOCK, max(upto, 2 * entry.filled, _STEP))
            entry.values[entry.filled:stop] = table.laws[table.codes[e]].sample(
                self._gen, stop - entry.filled)
            entry.filled = stop
            entry.state = self._bitgen.state
        return entry.values

    def _draws(self, kind: int, table: SpecTable, e: int, first: int, count: int) -> np.ndarray:
        if not 0 <= e < len(table):
            raise IndexError(f"element {e} out of range 0..{len(table) - 1}")
        first = _count(first, "first", 1)
        count = _count(count, "count", 0)
        code = table.codes[e]
        if code < 0 or not table.laws[code].is_random:
            return np.full(count, table.values[e])
        out = np.empty(count)
        pos, k0 = 0, first - 1
        while pos < count:
            b, off = divmod(k0 + pos, BLOCK)
            n = min(BLOCK - off, count - pos)
            out[pos : pos + n] = self._drawn(kind, table, e, b, off + n)[off : off + n]
            pos += n
        return out

    def duration(self, t: int, first: int, count: int = 1) -> np.ndarray:
        """Durations ``d_t(first), ..., d_t(first + count - 1)``, shape ``(count,)``."""
        return self._draws(TRANSITION, self.durations, t, first, count)

    def hold(self, p: int, first: int, count: int = 1) -> np.ndarray:
        """Holds ``h_p(first), ..., h_p(first + count - 1)``, shape ``(count,)``."""
        return self._draws(PLACE, self.holds, p, first, count)

    def _all(self, kind: int, table: SpecTable, first: int, count: int) -> np.ndarray:
        out = np.empty((_count(count, "count", 0), len(table)))
        out[:] = table.values  # fixed elements: a broadcast, no generator
        randoms = table.random_elements.tolist()
        b = (_count(first, "first", 1) - 1) // BLOCK
        if count and randoms and len(randoms) <= self._max_cached and \
                self._prepared.get(kind) != b:
            # The generator states of every element's block, derived at once (once per block:
            # a run asks for a few firings at a time; an entry evicted since is redone alone).
            self._prepare(kind, randoms, b)
            self._prepared[kind] = b
        for e in randoms:
            out[:, e] = self._draws(kind, table, e, first, count)
        return out

    def duration_block(self, first: int, count: int) -> np.ndarray:
        """Durations of every transition for firings ``first .. first + count - 1``.

        Returns an array of shape ``(count, n_transitions)``; row ``i`` is firing ``first + i``.
        Asking for whole aligned blocks (``first = 1 + j·BLOCK``, ``count = BLOCK``) wastes no
        draws.
        """
        return self._all(TRANSITION, self.durations, first, count)

    def hold_block(self, first: int, count: int) -> np.ndarray:
        """Holds of every place for firings ``first .. first + count - 1``, shape ``(count, m)``."""
        return self._all(PLACE, self.holds, first, count)
