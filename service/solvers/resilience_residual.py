"""The residual network of one maximum flow as an OR-Tools max-flow graph built once,
asked again and again which flow a group of closed arcs can reroute (see
:mod:`service.solvers.resilience`)."""

from __future__ import annotations

import numpy as np
from ortools.graph.python import max_flow as ortools_max_flow

from ..errors import SolverFailure


class ResidualSolver:
    """The residual network of one maximum flow, as an OR-Tools max-flow graph built
    once. A question closes a group of arcs (both their residual arcs) and reroutes
    their flow from a super source feeding their tails to a super sink fed by their
    heads.

    Only residual arcs with room are added (about half of them), plus both residual
    arcs of every arc that may be asked about.
    """

    def __init__(self, num_nodes, tail, head, capacity, unlimited, psi, arcs):
        self.psi, self.tail, self.head, self.num_nodes = psi, tail, head, num_nodes
        self.room = capacity - psi if unlimited is None else np.where(unlimited, capacity, capacity - psi)
        asked = np.zeros(tail.size, dtype=bool)
        asked[arcs] = True
        self.fwd_arcs = np.flatnonzero((self.room > 0) | asked)
        self.bwd_arcs = np.flatnonzero((psi > 0) | asked)
        solver = ortools_max_flow.SimpleMaxFlow()
        tail32, head32 = tail.astype(np.int32), head.astype(np.int32)
        self.fwd = solver.add_arcs_with_capacity(tail32[self.fwd_arcs], head32[self.fwd_arcs],
                                                 self.room[self.fwd_arcs])
        self.bwd = solver.add_arcs_with_capacity(head32[self.bwd_arcs], tail32[self.bwd_arcs],
                                                 psi[self.bwd_arcs].astype(np.int64))
        self.fwd_of = np.full(tail.size, -1, dtype=np.int64)
        self.fwd_of[arcs] = self.fwd[np.searchsorted(self.fwd_arcs, arcs)]
        self.bwd_of = np.full(tail.size, -1, dtype=np.int64)
        self.bwd_of[arcs] = self.bwd[np.searchsorted(self.bwd_arcs, arcs)]
        self.source, self.sink = num_nodes, num_nodes + 1
        nodes = np.arange(num_nodes, dtype=np.int32)
        self.feed = solver.add_arcs_with_capacity(np.full(num_nodes, self.source, np.int32), nodes,
                                                  np.zeros(num_nodes, np.int64))
        self.drain = solver.add_arcs_with_capacity(nodes, np.full(num_nodes, self.sink, np.int32),
                                                   np.zeros(num_nodes, np.int64))
        self.solver = solver

    def _set(self, handles: np.ndarray, capacities) -> None:
        # One call per arc: OR-Tools' Python API has no vectorised capacity setter.
        for arc, cap in zip(handles.tolist(), np.broadcast_to(capacities, handles.shape).tolist()):
            self.solver.set_arc_capacity(arc, cap)

    def reroute(self, group: np.ndarray):
        """Close the arcs of ``group`` and reroute their flow around them.

        Returns
        -------
        (rerouted, witness, source_side)
            How much was rerouted. ``witness``: the maximum flow with that much taken
            off the arc, for a single arc or a group that rerouted completely (which
            then carries nothing on the group); ``None`` for a group that did not.
            ``source_side``: for a single arc not rerouted completely, the source side
            of the final residual network's minimum cut (without the super nodes);
            else ``None``.
        """
        solver, psi = self.solver, self.psi
        amount = psi[group]
        tails, heads = self.tail[group], self.head[group]
        feed = np.bincount(tails, weights=amount, minlength=self.num_nodes).astype(np.int64)
        drain = np.bincount(heads, weights=amount, minlength=self.num_nodes).astype(np.int64)
        fed, drained = np.unique(tails), np.unique(heads)
        self._set(self.fwd_of[group], 0)
        self._set(self.bwd_of[group], 0)
        self._set(self.feed[fed], feed[fed])
        self._set(self.drain[drained], drain[drained])
        try:
            status = solver.solve(self.source, self.sink)
            if status != solver.OPTIMAL:
                raise SolverFailure(f"OR-Tools max-flow returned status {status}")
            rerouted = int(solver.optimal_flow())
            witness = psi.copy()
            witness[self.fwd_arcs] += np.asarray(solver.flows(self.fwd))
            witness[self.bwd_arcs] -= np.asarray(solver.flows(self.bwd))
            side = None
            if rerouted == int(amount.sum()):
                witness[group] = 0
            elif group.size == 1:
                witness[group] -= rerouted
                side = np.zeros(self.num_nodes + 2, dtype=bool)
                side[np.asarray(solver.get_source_side_min_cut(), dtype=np.int64)] = True
                side = side[: self.num_nodes]
            else:
                witness = None
        finally:
            self._set(self.fwd_of[group], self.room[group])
            self._set(self.bwd_of[group], psi[group])
            self._set(self.feed[fed], 0)
            self._set(self.drain[drained], 0)
        return rerouted, witness, side
