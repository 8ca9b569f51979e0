"""Exceptions raised by the max-plus algebra.

One root, :class:`MaxPlusError`, with subclasses named for the mathematical situation, so that
callers can tell a dead model from a malformed array. The application layer (``simulate``)
catches these and re-raises them with the model file and the element names attached.
"""

from __future__ import annotations

__all__ = ["GraphStructureError", "MaxPlusError", "NotLive", "Unfed"]


class MaxPlusError(ValueError):
    """Root of the errors raised by :mod:`cyclecheck.algebra`."""


class GraphStructureError(MaxPlusError):
    """The arrays describing an event graph are inconsistent (shape, index range, sign, NaN)."""


class NotLive(MaxPlusError):
    """A circuit of the event graph holds no token: its transitions can never fire.

    Attributes
    ----------
    circuit : list of int
        Transition indices of one token-free circuit, in circuit order.
    """

    def __init__(self, circuit: list[int], message: str | None = None) -> None:
        self.circuit = list(circuit)
        super().__init__(
            message or f"circuit {self.circuit} holds no token: the event graph is not live"
        )


class Unfed(MaxPlusError):
    """A transition has no input place, so nothing limits how often it fires.

    Attributes
    ----------
    transitions : list of int
        Indices of the transitions without an input place.
    """

    def __init__(self, transitions: list[int], message: str | None = None) -> None:
        self.transitions = list(transitions)
        super().__init__(
            message
            or f"transitions {self.transitions} have no input place: their firing rate is unbounded"
        )
