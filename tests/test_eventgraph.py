"""The EventGraph constructor (algebra/eventgraph.py): what it accepts and what it refuses.

These are the input rules of the representation documented at the top of the module (the
project's own contract), checked for every kind of array a caller may pass: the constructor
tests integers only where the array can hold fractions, and keeps a tuple of str as it is.
"""

from __future__ import annotations

import numpy as np
import pytest
from cyclecheck.algebra.eventgraph import EventGraph
from cyclecheck.algebra.exceptions import GraphStructureError


def ring(tokens, names=()):
    return EventGraph([1.0, 2.0], [0, 1], [1, 0], tokens, [0.0, 0.5], names=names)


@pytest.mark.parametrize("tokens", [[0, 1], [0.0, 1.0], np.array([0, 1], dtype=np.int32),
                                    np.array([0, 1], dtype=np.uint8), np.array([False, True])])
def test_integer_markings_of_any_type(tokens):
    """Markings given as ints, integer-valued floats, other integer types or booleans become
    int64 arrays with the same values, read-only."""
    g = ring(tokens)
    assert g.tokens.dtype == np.int64 and g.tokens.tolist() == [0, 1]
    assert not g.tokens.flags.writeable
    assert g.source.dtype == np.int64 and g.target.dtype == np.int64


@pytest.mark.parametrize("tokens", [[0, 1.5], np.array([0.0, 0.25])])
def test_fractional_marking_refused(tokens):
    with pytest.raises(GraphStructureError, match="tokens must hold integers"):
        ring(tokens)


def test_fractional_source_refused():
    with pytest.raises(GraphStructureError, match="source must hold integers"):
        EventGraph([1.0, 2.0], [0, 0.5], [1, 0], [0, 1], [0.0, 0.0])


def test_names_become_str():
    """Names of any type become str; a tuple of str is kept as given."""
    names = ("cut", "pack")
    assert ring([0, 1], names).names is names
    for given in (["cut", "pack"], np.array(["cut", "pack"])):
        got = ring([0, 1], given).names
        assert got == names and all(type(x) is str for x in got)
    assert ring([0, 1], (1, 2)).names == ("1", "2")
    assert ring([0, 1], (np.str_("a"), "b")).names == ("a", "b")
    assert all(type(x) is str for x in ring([0, 1], (np.str_("a"), "b")).names)
    assert ring([0, 1]).names == ()
    with pytest.raises(GraphStructureError, match="names must have 2 entries"):
        ring([0, 1], ("only",))


def test_read_only_arrays_are_shared_writable_ones_copied():
    """An array nothing can write (read-only, viewing only read-only arrays) is kept without a
    copy; a writable one, or a read-only view of a writable one, is copied, so that a later
    write by the caller does not change the graph."""
    frozen = np.array([0, 1, 1, 0], dtype=np.int64)
    frozen.setflags(write=False)
    src, dst = frozen[:2], frozen[2:]
    hold = np.array([0.0, 0.5])
    hold.setflags(write=False)
    g = EventGraph([1.0, 2.0], src, dst, [0, 1], hold)
    assert g.source is src and g.target is dst and g.hold is hold
    mutable = np.array([0, 1], dtype=np.int64)
    view = mutable[:]
    view.setflags(write=False)
    durations = np.array([1.0, 2.0])
    g = EventGraph(durations, view, [1, 0], [0, 1], [0.0, 0.5])
    mutable[0], durations[0] = 1, 9.0
    assert g.source.tolist() == [0, 1] and g.duration.tolist() == [1.0, 2.0]
    assert not g.source.flags.writeable and not g.duration.flags.writeable
