r"""The random streams of the sampler's blocks, made without building a SeedSequence per block.

Block ``b`` of element ``e`` of kind ``k`` in replication ``r`` is drawn from
``Generator(PCG64(SeedSequence(seed, spawn_key=(r, k, e, b))))`` (the contract documented in
:mod:`cyclecheck.simulate.durations`). Building a SeedSequence and a PCG64 costs about 40 µs, as
much as drawing a few thousand values, and a run needs one per element and block.
:func:`pcg64_states` computes the same generator states directly: SeedSequence's hashing and
PCG64's seeding written out with Python integers for the words every key shares (the seed, the
replication, the kind: hashed once and cached) and with numpy arrays over the keys for the
others. The sampler sets the result on one reused generator (about 3 µs). The tests check it
against numpy's own SeedSequence and PCG64 on random seeds and keys.

References
----------
.. [1] M. E. O'Neill, "PCG: A family of simple fast space-efficient statistically good
   algorithms for random number generation", Harvey Mudd College, HMC-CS-2014-0905, 2014
   (the PCG64 generator and its seeding by two LCG steps).
.. [2] NumPy documentation, "SeedSequence" and "PCG64" (numpy.random), the reference
   implementation whose numbers are reproduced here.
"""

from __future__ import annotations

import functools
from typing import Any

import numpy as np

__all__ = ["BlockStream", "pcg64_states", "state_of"]

# SeedSequence's hashing (numpy/random/bit_generator.pyx, after M. O'Neill's seed_seq_fe) and
# the seeding of PCG64 (numpy/random/src/pcg64: two LCG steps around the initial state).
_INIT_A, _MULT_A, _INIT_B, _MULT_B = 0x43B0D7E5, 0x931E8875, 0x8B51F9DD, 0x58F38DED
_MIX_L, _MIX_R, _POOL = 0xCA01F9DD, 0x4973F715, 4
_PCG_MULT = (2549297995355413924 << 64) + 4865540595714422341
_M128 = (1 << 128) - 1


def _words(x: int) -> list[int]:
    """A non-negative integer as SeedSequence reads it: 32-bit words, least significant first."""
    out = []
    while True:
        out.append(x & 0xFFFFFFFF)
        x >>= 32
        if not x:
            return out


def pcg64_states(seed: int, keys: np.ndarray) -> list[tuple[int, int]]:
    """``(state, inc)`` of ``PCG64(SeedSequence(seed, spawn_key=key))`` for each row of
    ``keys``, all at once.

    Parameters
    ----------
    seed : int
        ``>= 0``.
    keys : ndarray of int, shape (k, w)
        Spawn keys, every entry in ``0 .. 2**32 - 1``.

    Returns
    -------
    list of (int, int)
        The 128-bit state and increment of each generator, as ``PCG64().state["state"]``
        holds them.

    Notes
    -----
    The words common to every key (the seed, then leading key columns of one value, such as
    the replication and the kind) are hashed once as Python integers; the others as numpy
    arrays over the keys, or key by key for a few keys.
    """
    keys = np.asarray(keys, dtype=np.uint64)
    if keys.shape[0] < 32:  # numpy's per-call cost exceeds the work: one key at a time
        return [_seed_pcg64(seed, row)[0] for row in keys.tolist()]
    columns = [int(c[0]) if (c == c[0]).all() else c for c in keys.T]
    return _seed_pcg64(seed, columns)


_M32 = 0xFFFFFFFF


def _hashmix(value: Any, hash_a: int) -> tuple[Any, int]:
    value = value ^ hash_a
    hash_a = (hash_a * _MULT_A) & _M32
    value = (value * hash_a) & _M32
    return value ^ (value >> 16), hash_a


def _mix(x: Any, y: Any) -> Any:
    r = (x * _MIX_L - y * _MIX_R) & _M32
    return r ^ (r >> 16)


@functools.lru_cache(maxsize=64)
def _pool_after(seed: int, head: tuple[int, ...]) -> tuple[tuple[int, ...], int]:
    """SeedSequence's pool (and hash constant) after the seed and the leading spawn-key words
    ``head``: common to all the blocks of a replication and kind, so hashed once."""
    run = _words(seed)
    run += [0] * (_POOL - len(run))  # a spawn key follows: the seed is padded to the pool
    pool: list[int] = []
    hash_a = _INIT_A
    for i in range(_POOL):
        v, hash_a = _hashmix(run[i], hash_a)
        pool.append(v)
    for i_src in range(_POOL):
        for i_dst in range(_POOL):
            if i_src != i_dst:
                v, hash_a = _hashmix(pool[i_src], hash_a)
                pool[i_dst] = _mix(pool[i_dst], v)
    for word in [*run[_POOL:], *head]:
        for i_dst in range(_POOL):
            v, hash_a = _hashmix(word, hash_a)
            pool[i_dst] = _mix(pool[i_dst], v)
    return tuple(pool), hash_a


def _seed_pcg64(seed: int, columns: list[Any]) -> list[tuple[int, int]]:
    """SeedSequence's hashing of ``seed`` and the spawn-key ``columns`` (each an int, common to
    every key, or an array over keys), then the seeding of PCG64."""
    head = 0
    while head < min(2, len(columns)) and isinstance(columns[head], int):
        head += 1
    start, hash_a = _pool_after(seed, tuple(columns[:head]))
    pool: list[Any] = list(start)
    for word in columns[head:]:
        for i_dst in range(_POOL):
            v, hash_a = _hashmix(word, hash_a)
            pool[i_dst] = _mix(pool[i_dst], v)
    hash_b = _INIT_B
    words = []
    for i in range(8):  # generate_state(4, uint64): 8 words of 32 bits
        v = pool[i % _POOL] ^ hash_b
        hash_b = (hash_b * _MULT_B) & _M32
        v = (v * hash_b) & _M32
        words.append(v ^ (v >> 16))
    if any(isinstance(w, np.ndarray) for w in words):
        size = max(w.size for w in words if isinstance(w, np.ndarray))
        w64 = [np.broadcast_to(np.asarray(w, dtype=np.uint64), size) for w in words]
        u64 = [(w64[2 * j] | (w64[2 * j + 1] << np.uint64(32))).tolist() for j in range(4)]
    else:
        u64 = [[words[2 * j] | (words[2 * j + 1] << 32)] for j in range(4)]
    out = []
    for s0, s1, i0, i1 in zip(*u64, strict=True):
        inc = ((((i0 << 64) | i1) << 1) | 1) & _M128
        state = (inc + ((s0 << 64) | s1)) & _M128  # step from 0, add the initial state
        out.append(((state * _PCG_MULT + inc) & _M128, inc))  # and step once more
    return out


def state_of(bitgen: np.random.PCG64) -> tuple[int, int]:
    """``(state, inc)`` of a PCG64, as :func:`pcg64_states` gives them."""
    st = bitgen.state["state"]
    return st["state"], st["inc"]


class BlockStream:
    """A block of one element being drawn: its values so far and the generator state after
    them (a freshly seeded PCG64 state ``(state, inc)`` before the first draw)."""

    __slots__ = ("b", "filled", "state", "values")

    def __init__(self, b: int, seeded: tuple[int, int], size: int) -> None:
        self.b = b
        self.values = np.empty(size)
        self.filled = 0
        self.state: dict[str, Any] = {"bit_generator": "PCG64",
                                      "state": {"state": seeded[0], "inc": seeded[1]},
                                      "has_uint32": 0, "uinteger": 0}
