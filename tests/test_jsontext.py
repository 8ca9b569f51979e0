"""The fast JSON text of large documents against Python's own encoder.

Reference: Python's standard library ``json`` module (``json.dumps`` with
``separators=(",", ":")``, ``allow_nan=False`` and the default ``ensure_ascii=True``), whose
text is the contract of ``--json``; it writes JSON as RFC 8259 defines it (Bray, *The
JavaScript Object Notation (JSON) Data Interchange Format*, 2017: §4 objects, §6 numbers,
§7 strings and their escapes). :class:`~cyclecheck.simulate.jsontext.CompactEncoder` must give
the same text byte for byte, including ``float.__repr__``'s numbers (``3.0``, ``1e-05``,
``-0.0``), ``null`` for None, the escapes of ids with quotes, backslashes, control characters
and non-ASCII characters, and the encoder's own error for inf and NaN.
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path
from unittest import mock

import numpy as np
import pytest
from cyclecheck.simulate import jsontext, result
from cyclecheck.simulate.jsontext import CompactEncoder, float_texts
from hypothesis import given, settings
from hypothesis import strategies as st

ROOT = Path(__file__).resolve().parents[1]
MODELS = ROOT / "models"


def reference(value: object) -> str:
    """Python's encoder: the text the fast one must equal."""
    return json.dumps(value, separators=(",", ":"), allow_nan=False)


def fast(value: object, arrow: bool = True) -> str:
    """The fast encoder on every map (not only on maps of MIN_FAST entries), its values
    formatted by Arrow (``arrow``) or by Python."""
    with mock.patch.object(jsontext, "MIN_FAST", 1), \
            mock.patch.object(jsontext, "ARROW_MIN", 1 if arrow else 10**9):
        return CompactEncoder().encode(value)


#: Values whose text is easily got wrong: the two zeros, the ends of the double range and of
#: Python's fixed notation (1e-4 <= |x| < 1e16), whole numbers, 2^53 and its neighbours, and
#: values whose shortest digits are a tie or need all 17 digits.
SPECIAL = [0.0, -0.0, 1.0, -1.0, 3.0, 1e-300, -1e-300, 5e-324, -5e-324, 2.2250738585072014e-308,
           1e300, 1.7976931348623157e308, -1.7976931348623157e308, 1e-4, 9.999999999999999e-05,
           1e-05, 1e-07, 1e15, 1.5e15, 9999999999999998.0, 1e16, 1e17, 1e21, 1e22, 1e23,
           2.0**53, 2.0**53 + 2, 2.0**53 - 1, 0.1, 0.2, 0.30000000000000004, 2 / 3, 100 / 3,
           1.005, 123456789.12345679, 1234567890123456.8, 0.5, 0.25, 12.0, 1e-4 * 3]
#: Ids JSON must escape, and some that it writes as they are.
ODD_IDS = ['"', '\\', '"q"', 'back\\slash', "tab\tx", "line\nfeed", "\x00", "\x1f", "\x7f",
           "Füller", "ünï\u2028", "☃", "\U0001f600", "\ud800", "a,b:c", '",":"', "", " ", "t0",
           "{}", "[1]", "null", "1e5"]

values = st.one_of(st.none(), st.floats(allow_nan=False, allow_infinity=False),
                   st.sampled_from(SPECIAL), st.integers(-2**60, 2**60).map(float))
keys = st.one_of(st.text(), st.sampled_from(ODD_IDS))


@st.composite
def number_maps(draw: st.DrawFn) -> dict[str, float | None]:
    """Maps of ids to floats or None, often drawing from a small pool (repeated values)."""
    ids = draw(st.lists(keys, min_size=1, max_size=60, unique=True))
    if draw(st.booleans()):
        pool = draw(st.lists(values, min_size=1, max_size=4))
        drawn = [draw(st.sampled_from(pool)) for _ in ids]
    else:
        drawn = [draw(values) for _ in ids]
    return dict(zip(ids, drawn, strict=True))


@settings(max_examples=300, deadline=None)
@given(number_maps(), st.booleans())
def test_maps_equal_pythons_encoder(mapping: dict[str, float | None], arrow: bool) -> None:
    """Any map of str ids to floats or None: the text of Python's encoder, with the values
    formatted by Arrow or by Python."""
    assert fast(mapping, arrow) == reference(mapping)


@pytest.mark.parametrize("arrow", [True, False])
def test_adversarial_map_of_every_special_value_and_id(arrow: bool) -> None:
    """Every odd id with every special value, each value also negated, repeated and mixed with
    None: one map, the text of Python's encoder."""
    ids = [f"{o}{i}" for i in range(4) for o in ODD_IDS]
    pool = SPECIAL + [-v for v in SPECIAL] + [None]
    mapping = {k: pool[i % len(pool)] for i, k in enumerate(ids)}
    text = fast(mapping, arrow)
    assert text == reference(mapping)
    assert '"-0.0"' not in text and ":-0.0," in text and ":0.0," in text  # zeros kept apart


PRINTABLE = [chr(c) for c in range(0x20, 0x7f) if chr(c) not in '"\\']


@pytest.mark.parametrize("odd", [None, '"', "\\", "\x7f", "\x1f", "\n", "é", "\u2028", "\ud83d"])
def test_keys_without_escapes_and_with_one(odd: str | None) -> None:
    """Keys of printable ASCII other than ``"`` and ``\\`` are written as they are; a single
    key with a character to escape (DEL and control characters too, RFC 8259 §7; Python also
    escapes every non-ASCII character) is escaped as Python escapes it."""
    ids = [f"{c}{i}" for i, c in enumerate(PRINTABLE * 3)]
    if odd is not None:
        ids[len(ids) // 2] = f"x{odd}y"
    mapping = dict.fromkeys(ids, 0.5)
    assert fast(mapping) == reference(mapping)


def test_zeros_of_both_signs_are_written_apart() -> None:
    """``-0.0 == 0.0`` but their texts differ: the distinct values are told apart by bits."""
    mapping = {"a": 0.0, "b": -0.0, "c": 0.0, "d": -0.0}
    assert fast(mapping) == '{"a":0.0,"b":-0.0,"c":0.0,"d":-0.0}' == reference(mapping)


@pytest.mark.parametrize("bad", [float("inf"), float("-inf"), float("nan")])
def test_inf_and_nan_raise_the_encoders_own_error(bad: float) -> None:
    """``allow_nan=False``: a map holding inf or NaN raises what Python's encoder raises."""
    mapping = {"a": 1.0, "b": None, "c": bad}
    with pytest.raises(ValueError) as ours:
        fast(mapping)
    with pytest.raises(ValueError) as theirs:
        reference(mapping)
    assert str(ours.value) == str(theirs.value)


@pytest.mark.parametrize("value", [
    {"a": 1, "b": 2.5},  # an int: not a map of floats
    {"a": True, "b": 1.0},  # bool is an int
    {"a": "x", "b": 1.0},
    {1: 1.0, "b": 2.0},  # a key that is not a str: Python writes "1"
    {"a": np.float64(1.5), "b": 2.0},  # a float subclass
    {"a": [1.0, -0.0], "b": {"c": 1e-05, "d": None}},
    {"outer": {"inner": {f"t{i}": i / 7 for i in range(50)}, "list": [{"x": 1.0}], "n": None}},
    {"empty": {}, "e2": {"x": {}}},
    [{"t0": 1.0, "t1": 2.0}],  # a map inside a list is not looked into, still the same text
    3.0, None, "text", [],
])
def test_everything_else_is_pythons_text(value: object) -> None:
    """Values that are not maps of floats, and maps nested in maps: the same text."""
    assert fast(value) == reference(value)


def test_maps_sharing_their_keys_reuse_them_and_stay_right() -> None:
    """One encoder keeps the escaped keys of the last map: the next map with the same keys in
    the same order reuses them, one with other keys (or another order) does not."""
    ids = [f"t{i}" for i in range(30)] + ODD_IDS
    first = dict.fromkeys(ids, 1.5)
    second = {k: float(i) for i, k in enumerate(ids)}
    reordered = dict(reversed(list(second.items())))
    other = {f"{k}x": v for k, v in second.items()}
    doc = {"a": first, "b": second, "c": reordered, "d": other, "e": first}
    assert fast(doc) == reference(doc)


def test_float_texts_are_float_repr_on_many_doubles() -> None:
    """The formatter of distinct values (Arrow's shortest digits with Python's notation) is
    ``float.__repr__`` on random bit patterns, log-uniform values across Python's fixed
    notation, short decimals, whole numbers and the neighbours of powers of 2 and 10."""
    rng = np.random.default_rng(20261202)
    bits = rng.integers(0, 2**64, 50_000, dtype=np.uint64).view(np.float64)
    powers = np.concatenate([10.0 ** np.arange(-6, 18), 2.0 ** np.arange(-20, 60)])
    near = [powers] + [np.nextafter(powers, side * np.inf) for side in (-1, 1)]
    for _ in range(20):
        near += [np.nextafter(near[-2], -np.inf), np.nextafter(near[-1], np.inf)]
    x = np.concatenate([
        bits[np.isfinite(bits)],
        rng.choice([-1.0, 1.0], 50_000) * 10 ** rng.uniform(-5, 17, 50_000),
        rng.integers(-10**9, 10**9, 20_000) / 10.0 ** rng.integers(0, 12, 20_000),
        rng.integers(-2**53, 2**53, 20_000).astype(np.float64),
        *near, np.array(SPECIAL), -np.array(SPECIAL), np.array([np.nan]),
    ])
    expected = ["null" if v != v else repr(v) for v in x.tolist()]
    assert float_texts(x).to_pylist() == expected
    with mock.patch.object(jsontext, "_arrow_agrees", lambda: False):  # Python writes all
        assert float_texts(x[:2000]).to_pylist() == expected[:2000]


def test_the_probe_finds_a_formatter_that_differs() -> None:
    """The probe compares Arrow's texts with Python's: a formatter writing 17 digits (not the
    shortest) is caught."""
    assert jsontext._arrow_agrees()
    with mock.patch.object(jsontext, "_arrow_texts",
                           lambda x: jsontext._ascii([f"{v:.17g}" for v in x.tolist()])):
        jsontext._arrow_agrees.cache_clear()
        try:
            assert not jsontext._arrow_agrees()
        finally:
            jsontext._arrow_agrees.cache_clear()


def test_texts_of_a_sliced_arrow_array() -> None:
    """The joined text and the exponent search read only the strings of the array, also when
    it is a slice of a larger one (its bytes start further on in the buffer)."""
    whole = jsontext._ascii(["1e+300", "ab", "cde", "2e-7"])
    assert jsontext._concatenated(whole.slice(1, 2)) == "abcde"
    assert jsontext._concatenated(whole.slice(4, 0)) == ""
    offsets, data = jsontext._layout(whole.slice(1, 2))
    assert offsets.tolist() == [0, 2, 5] and data.tobytes() == b"abcde"


def _old_dumps(document: dict[str, object]) -> str:
    """The large-document text as it was written before the fast encoder: one top-level key a
    line, each value through Python's encoder."""
    options = {"separators": (",", ":"), "allow_nan": False, "default": result._json_default}
    return "{\n" + ",\n".join(f"  {json.dumps(str(k))}: {json.dumps(v, **options)}"
                              for k, v in document.items()) + "\n}"


@pytest.mark.parametrize("command", ["analyze fixed", "analyze random", "check fixed"])
def test_documents_are_written_as_before(command: str) -> None:
    """Real documents (the maps by transition, the eigenvector, slack with null, utilization,
    the schedule inside ``check``'s figures), every map through the fast encoder: the text of
    Python's encoder, one top-level key a line."""
    from cyclecheck.simulate import analyze, check

    quick = {"precision": 0.05, "firings": 500, "replications": 4, "workers": 1}
    doc = {"analyze fixed": lambda: analyze(MODELS / "image_pipeline.toml"),
           "analyze random": lambda: analyze(MODELS / "closed_line_exponential.toml", **quick),
           "check fixed": lambda: check(MODELS / "packaging_cell.toml")}[command]()
    with mock.patch.object(jsontext, "MIN_FAST", 1), mock.patch.object(jsontext, "ARROW_MIN", 1), \
            mock.patch.object(result, "PRETTY_LIMIT", 0):
        assert result.dumps(doc) == _old_dumps(doc)


_NO_PANDAS = """
import sys
import numpy as np
from cyclecheck.simulate import result
ids = [f"t{i}" for i in range(30000)]
values = (np.arange(30000) * 0.37).tolist()
doc = {"by": dict(zip(ids, values)), "one": dict.fromkeys(ids, 2.5), "big": "x" * 2_000_000}
text = result.dumps(doc)
assert text.count("\\n") == 4, text[:200]
print("pandas" in sys.modules, "pyarrow" in sys.modules)
"""


def test_large_documents_do_not_import_pandas() -> None:
    """Arrow arrays are made and read through their buffers: pyarrow would import pandas
    (0.3 s) for ``pyarrow.array`` or ``to_numpy``, which nothing else on the path of
    ``analyze`` for a large model does."""
    out = subprocess.run([sys.executable, "-c", _NO_PANDAS], capture_output=True, text=True,
                         timeout=300, check=True)
    assert out.stdout.split() == ["False", "True"], out.stderr
