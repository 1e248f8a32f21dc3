"""Result shapes and exceptions shared by every algorithm of the flow engine."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


def _frozen(array: np.ndarray) -> np.ndarray:
    """Return the array made read-only, so a frozen result cannot be changed behind its back."""
    array.flags.writeable = False
    return array


@dataclass(frozen=True, eq=False)
class FlowResult:
    """A maximum flow with both sides of a minimum cut.

    `flow` holds one int64 value per input edge; `source_side` is True for the nodes reachable
    from the source in the final residual graph (the smallest source side of a minimum cut);
    `phases` counts Dinic's BFS phases (with lower bounds, those of the feasibility stage too);
    `sink_side` is True for the nodes that can still reach the sink in that residual graph (the
    smallest sink side of a minimum cut). Residuals respect lower bounds: an edge's backward
    residual is `flow - lower`.
    """

    value: int
    flow: np.ndarray
    source_side: np.ndarray
    phases: int
    sink_side: np.ndarray

    def __post_init__(self) -> None:
        _frozen(self.flow)
        _frozen(self.source_side)
        _frozen(self.sink_side)


@dataclass(frozen=True, eq=False)
class CostFlowResult:
    """A minimum-cost flow with node potentials that certify its optimality.

    For every edge, the reduced cost `costs + potentials[tail] - potentials[head]` is >= 0 where
    `flow < capacity` and <= 0 where `flow > lower`.
    """

    flow: np.ndarray
    cost: int
    potentials: np.ndarray

    def __post_init__(self) -> None:
        _frozen(self.flow)
        _frozen(self.potentials)


class FlowError(Exception):
    """Base class of every error the flow engine raises."""


class FlowInputError(FlowError, ValueError):
    """The arrays given to the engine do not describe a valid network."""


class FlowCheckError(FlowError):
    """A flow, cut or optimality certificate failed an independent check."""


class InfeasibleError(FlowError):
    """No flow meets the bounds and supplies; `source_side` is a violated cut.

    With `S = source_side`, the nodes in S must send out more than their arcs can carry:
    `sum(supplies[S]) + sum(lower on edges entering S) - sum(upper on edges leaving S)`
    equals `deficit`, which is > 0 (supplies are all zero for a circulation). It is also the
    amount of flow that could not be routed.
    """

    def __init__(self, message: str, source_side: np.ndarray, deficit: int) -> None:
        super().__init__(message)
        self.source_side = _frozen(source_side)
        self.deficit = int(deficit)
