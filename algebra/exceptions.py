"""Exceptions raised by the max-plus algebra, and the root of every cyclecheck error.

:class:`CycleCheckError` is the one root of everything a user can cause, in any room of the
package: the algebra's :class:`MaxPlusError` (with subclasses named for the mathematical
situation, so that callers can tell a dead model from a malformed array), the application's
model and usage errors (``cyclecheck.simulate.errors``) and the report errors
(``cyclecheck.reports``). It lives here, in the lowest room, because every other room may import
the algebra and the algebra imports nothing of theirs. The application layer catches the
algebra's errors and re-raises them with the model file and the element names attached.
"""

from __future__ import annotations

__all__ = [
    "CycleCheckError",
    "GraphStructureError",
    "InvalidArray",
    "MaxPlusError",
    "NotLive",
    "OutOfRange",
    "PositiveCircuit",
    "Unfed",
]


class CycleCheckError(Exception):
    """Root of every error cyclecheck raises for something its user can cause.

    Catch this one class to handle bad models, logs, options, documents and outputs alike; the
    command line turns it into exit status 2 and one paragraph on stderr.
    """


class MaxPlusError(CycleCheckError, ValueError):
    """Root of the errors raised by :mod:`cyclecheck.algebra` (also a :class:`ValueError`)."""


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


class InvalidArray(MaxPlusError):
    """An array given to the algebra has the wrong shape or a value outside its domain.

    Examples: a matrix with NaN or +inf (only finite numbers and ε = −inf are max-plus scalars),
    a non-square matrix where a square one is needed, a block of random durations of the wrong
    shape or with negative values.
    """


class PositiveCircuit(MaxPlusError):
    """A circuit of positive weight: the Kleene star A* = E ⊕ A ⊕ A² ⊕ … diverges.

    Attributes
    ----------
    nodes : list of int
        Indices of the nodes through which a closed walk of positive weight passes (each
        shares a strongly connected component with a circuit of positive weight).
    """

    def __init__(self, nodes: list[int], message: str | None = None) -> None:
        self.nodes = list(nodes)
        super().__init__(
            message
            or f"nodes {self.nodes} lie on a circuit of positive weight: the Kleene star diverges"
        )


class OutOfRange(MaxPlusError):
    """A number, or a sum the answer needs, lies beyond the range of floating point.

    The weight of a circuit (its durations and holds added up) must stay below about 1.8e308,
    the largest double; so must the biases, sums of ``w - eta m`` along paths. Rescale the
    time unit (seconds to hours) when this is raised.
    """
