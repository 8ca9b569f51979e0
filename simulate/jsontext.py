"""Compact JSON text of large result documents: the text of Python's encoder, written faster.

The analysis of 10^5 transitions holds maps ``{transition id: number}`` of that size
(``cycle_time_by_transition``, ``eigenvector``, ``slack``). Python's compiled encoder walks such
a map item by item and formats every float with ``float.__repr__`` (about 1 µs each here), most
of the time spent on a large document. A map of :data:`MIN_FAST` entries or more whose keys
are str and whose values are float or None is written here from arrays instead:

* each **distinct** value is formatted once: a strongly connected graph has a single cycle
  time, most slacks are 0. Values are told apart by their bits, not by ``==``: ``-0.0 == 0.0``
  is true, yet the two are written apart;
* many distinct values (the eigenvector) are formatted by Arrow's cast of doubles to strings,
  4 times faster than ``float.__repr__``. Both write the shortest digits that read back to
  the same double, the nearest of them, ties to even (Python: David Gay's ``dtoa`` in mode 0;
  Arrow: the double-conversion library's ``ToShortest``, which chose Gay's tie rule; from
  memory), so the digits are the same (no difference on 7·10^6 doubles that Arrow writes
  without an exponent, and ``tests/test_jsontext.py`` checks 2·10^5 more on every run). Only
  the notation differs: Arrow leaves out the ``.0`` of a whole number (added here), and
  writes ``1e+15`` where Python writes ``1000000000000000.0`` and ``0.00001`` where Python
  writes ``1e-05``. Python's fixed notation holds for ``1e-4 <= |x| < 1e16``; outside it, and
  wherever Arrow chose an exponent, ``float.__repr__`` writes the value. A probe of awkward
  values checks once per process that Arrow still writes what Python writes; if not, Python
  writes every distinct value;
* the keys are escaped once per document and shared by the maps with the same keys in the
  same order: keys of printable ASCII without ``"`` and ``\\`` are written as they are, others
  by ``encode_basestring_ascii`` (the encoder's own function for ``ensure_ascii``);
* keys and values are joined by Arrow, in one pass.

Everything else goes to :func:`json.dumps` itself: other values, containers other than dicts
(they are not looked into), and any map holding inf or NaN (``allow_nan=False``: the encoder
raises its own error). The text is exactly ``json.dumps(value, separators=(",", ":"),
allow_nan=False, default=default)``; ``tests/test_jsontext.py`` checks it.
"""

from __future__ import annotations

import functools
import json
from collections.abc import Callable
from json.encoder import encode_basestring_ascii
from typing import Any

import numpy as np

__all__ = ["ARROW_MIN", "MIN_FAST", "CompactEncoder", "float_texts", "json_floats"]

#: Smallest map written from arrays: smaller ones cost less through :func:`json.dumps` (and
#: never import pyarrow, about 0.1 s; models this large are read with it anyway).
MIN_FAST = 10_000
#: Fewest distinct values formatted by Arrow; fewer are written by ``float.__repr__``.
ARROW_MIN = 1000
#: Values whose text tells whether Arrow writes what Python writes: whole numbers, ties of
#: the shortest digits, the ends of Python's fixed notation, the smallest and largest doubles.
PROBE = (0.0, -0.0, 1.0, -7.0, 123.0, 0.1, 0.30000000000000004, 2 / 3, 100 / 3, 1.005, 5e-324,
         1e-4, 9.999999999999999e-05, 1e-05, 1e15, 1.5e15, 9999999999999998.0, 1e16, 1e22,
         1e23, 2.0**53, 2.0**53 + 2, 123456789.12345679, 1.7976931348623157e308)


def json_floats(values: Any, finite: bool = False) -> list[float | None]:
    """``values`` as a list of Python floats (one ``tolist``, not a call per element); with
    ``finite``, None where JSON has no number (inf, NaN)."""
    array = np.asarray(values, dtype=np.float64)
    out: list[float | None] = array.tolist()
    if finite:
        for i in np.flatnonzero(~np.isfinite(array)).tolist():
            out[i] = None
    return out


class CompactEncoder:
    """``encode(value)``: the compact JSON text of ``value``.

    One encoder serves one document: it keeps the escaped keys of the last map it wrote, which
    the next maps of the same transitions reuse.

    Parameters
    ----------
    default : callable, optional
        Passed to :func:`json.dumps`: what to write for objects JSON does not know.
    """

    def __init__(self, default: Callable[[Any], Any] | None = None) -> None:
        self.default = default
        self._keys: list[str] | None = None
        self._key_texts: Any = None  # Arrow strings ',"key":'

    def encode(self, value: Any) -> str:
        """Exactly ``json.dumps(value, separators=(",", ":"), allow_nan=False, default=...)``."""
        if type(value) is dict:
            if len(value) >= MIN_FAST:
                text = self._number_map(value)
                if text is not None:
                    return text
            if dict in set(map(type, value.values())) and set(map(type, value)) == {str}:
                # a large map may sit inside: each value on its own, joined as the encoder does
                return "{" + ",".join([f"{encode_basestring_ascii(k)}:{self.encode(v)}"
                                       for k, v in value.items()]) + "}"
        return json.dumps(value, separators=(",", ":"), allow_nan=False, default=self.default)

    def _number_map(self, mapping: dict[Any, Any]) -> str | None:
        """The text of a map of str keys and float or None values; None for any other map."""
        import pyarrow.compute as pc

        values = list(mapping.values())
        if not set(map(type, values)) <= {float, type(None)}:
            return None
        keys = self._escaped_keys(mapping)
        if keys is None:
            return None
        numbers = np.array(values, dtype=np.float64)  # None becomes NaN
        nan = int(np.isnan(numbers).sum())
        if np.isinf(numbers).any() or (nan and nan != values.count(None)):
            return None  # an inf or a NaN among the values: json.dumps raises
        bits, where = np.unique(numbers.view(np.uint64), return_inverse=True)
        texts = float_texts(bits.view(np.float64)).take(_arrow(where.ravel().astype(np.int64)))
        pairs = pc.binary_join_element_wise(keys, texts, _repeated("", len(values)))
        return "{" + _concatenated(pairs)[1:] + "}"  # the first key's comma dropped

    def _escaped_keys(self, mapping: dict[Any, Any]) -> Any:
        """The keys as Arrow strings ``,"key":`` (escaped as the encoder does), or None if a
        key is not a str."""
        keys = list(mapping)
        if keys != self._keys:  # the same str objects compare by identity: fast
            try:
                joined = "".join(keys)
            except TypeError:  # a key that is not a str: json.dumps converts it
                return None
            if (joined.isascii() and joined.isprintable() and '"' not in joined
                    and "\\" not in joined):  # printable ASCII but " and \: no escapes
                self._key_texts = _ascii(keys, ',"', '":')
            else:
                self._key_texts = _ascii(list(map(encode_basestring_ascii, keys)), ",", ":")
            self._keys = keys
        return self._key_texts


def float_texts(x: np.ndarray) -> Any:
    """``float.__repr__`` of each value of ``x``, ``null`` for NaN, as an Arrow array.

    Arrow writes the values when there are :data:`ARROW_MIN` or more and it agrees with
    Python on :data:`PROBE`; Python writes the others.
    """
    x = np.asarray(x, dtype=np.float64)
    if x.size >= ARROW_MIN and _arrow_agrees():
        return _arrow_texts(x)
    return _ascii(_python_texts(x))


def _python_texts(x: np.ndarray) -> list[str]:
    return ["null" if v != v else float.__repr__(v) for v in x.tolist()]


def _arrow_texts(x: np.ndarray) -> Any:
    import pyarrow as pa
    import pyarrow.compute as pc

    texts = pc.cast(_arrow(x), pa.large_string())
    offsets, data = _layout(texts)
    exponent = np.zeros(x.size, dtype=bool)  # where Arrow wrote an exponent
    exponent[np.searchsorted(offsets, np.flatnonzero(data == ord("e")), side="right") - 1] = True
    size = np.abs(x)
    fixed = (((size >= 1e-4) & (size < 1e16)) | (x == 0)) & ~exponent  # as Python; NaN not
    whole = fixed & (x == np.trunc(x))  # Arrow writes 3 and -0 where Python writes 3.0, -0.0
    count = int(whole.sum())
    texts = pc.replace_with_mask(texts, _arrow(whole), pc.binary_join_element_wise(
        texts.filter(_arrow(whole)), _repeated(".0", count), _repeated("", count)))
    return pc.replace_with_mask(texts, _arrow(~fixed), _ascii(_python_texts(x[~fixed])))


@functools.cache
def _arrow_agrees() -> bool:
    """Whether Arrow's texts of :data:`PROBE` (and their negatives) are Python's."""
    probe = np.array([*PROBE, *(-v for v in PROBE)])
    return bool(_arrow_texts(probe).to_pylist() == _python_texts(probe))


# Arrow arrays are made from their buffers and read through them: ``pyarrow.array``, Python
# scalars and numpy arrays handed to ``pyarrow.compute``, and ``to_numpy`` make pyarrow
# import pandas (0.3 s), which nothing else on the path of ``analyze`` does.

def _arrow(values: np.ndarray) -> Any:
    """A numpy array of float64, int64 or bool as an Arrow array, without a copy of numbers."""
    import pyarrow as pa

    if values.dtype == np.bool_:
        return pa.Array.from_buffers(pa.bool_(), values.size, [
            None, pa.py_buffer(np.packbits(values, bitorder="little"))])
    kind = {np.dtype(np.float64): pa.float64(), np.dtype(np.int64): pa.int64()}[values.dtype]
    return pa.Array.from_buffers(kind, values.size, [None, pa.py_buffer(
        np.ascontiguousarray(values))])


def _ascii(texts: list[str], prefix: str = "", suffix: str = "") -> Any:
    """ASCII str, each between ``prefix`` and ``suffix``, as an Arrow large_string array."""
    import pyarrow as pa

    lengths = np.fromiter(map(len, texts), dtype=np.int64, count=len(texts))
    data = prefix + (suffix + prefix).join(texts) + suffix if texts else ""
    return _strings(lengths + len(prefix) + len(suffix), pa.py_buffer(data.encode("ascii")))


def _repeated(text: str, count: int) -> Any:
    """``count`` times the ASCII ``text`` as an Arrow large_string array."""
    import pyarrow as pa

    return _strings(np.full(count, len(text)), pa.py_buffer((text * count).encode("ascii")))


def _strings(lengths: np.ndarray, data: Any) -> Any:
    import pyarrow as pa

    offsets = np.zeros(lengths.size + 1, dtype=np.int64)
    np.cumsum(lengths, out=offsets[1:])
    return pa.Array.from_buffers(pa.large_string(), lengths.size,
                                 [None, pa.py_buffer(offsets), data])


def _layout(strings: Any) -> tuple[np.ndarray, np.ndarray]:
    """Offsets (n + 1, from 0) and bytes of the strings of an Arrow large_string array
    without nulls."""
    offsets = np.frombuffer(strings.buffers()[1], dtype=np.int64)
    offsets = offsets[strings.offset : strings.offset + len(strings) + 1]
    data = strings.buffers()[2]
    data = (np.frombuffer(data, dtype=np.uint8) if data is not None
            else np.zeros(0, dtype=np.uint8))
    return offsets - offsets[0], data[offsets[0] : offsets[-1]]


def _concatenated(strings: Any) -> str:
    """The strings of an Arrow large_string array (ASCII, no nulls) one after the other."""
    return _layout(strings)[1].tobytes().decode("ascii")
