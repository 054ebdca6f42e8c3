"""The service's own check of single-arc closure losses (resilience answers).

A claim "closing arc e lowers the maximum flow from v to v - L" needs two proofs:

* ``value_without >= v - L``: a maximum flow psi of the whole network that carries
  only L on e. Decomposing psi into s-t paths and cycles, the ones through e carry
  psi_e in total; dropping them leaves a flow of the network without e of value at
  least v - psi_e. So every checked maximum flow bounds every arc's loss at once:
  ``loss(a) <= psi_a``, and an arc no checked flow uses cannot lower the value.
* ``value_without <= v - L``: an s-t cut of the network without e whose capacity is
  v - L (weak duality: no flow exceeds a cut).

:class:`ClosureChecks` recomputes both from the problem data alone (integers,
exactly), whatever produced the witnesses, and raises
:class:`~service.errors.SelfCheckFailed` when one does not hold.
"""

from __future__ import annotations

import numpy as np

from ..errors import SelfCheckFailed
from .certificates import capacity_excess, node_balance


def _fail(what: str) -> None:
    raise SelfCheckFailed(f"self-check failed: {what}")


class ClosureChecks:
    """Collects and checks the witnesses of a resilience answer.

    Parameters
    ----------
    num_nodes : int
    tail, head : ndarray of int
    capacity : ndarray of int64
        Ignored where ``unlimited``.
    unlimited : ndarray of bool or None
    source, sink : int
    value : int
        The maximum flow value with every arc open (proved separately, by a cut).
    """

    def __init__(self, num_nodes, tail, head, capacity, unlimited, source: int, sink: int, value: int):
        self.num_nodes, self.tail, self.head = num_nodes, tail, head
        self.capacity, self.unlimited = capacity, unlimited
        self.source, self.sink, self.value = source, sink, value
        #: Least flow each arc carries in any checked maximum flow: an upper bound on its loss.
        self.bound = np.full(tail.size, np.iinfo(np.int64).max, dtype=np.int64)
        #: The capacity of the checked cut without each arc (-1: none checked).
        self.cut_value = np.full(tail.size, -1, dtype=np.int64)
        self.flows_checked = 0

    def witness(self, flows: np.ndarray) -> None:
        """Check that ``flows`` is a maximum flow and tighten every arc's loss bound."""
        excess = capacity_excess(flows, self.capacity, self.unlimited)
        if excess.size and excess.max() > 0:
            _fail(f"a witness flow leaves [0, capacity] on arc {int(np.argmax(excess))}")
        balance = node_balance(self.num_nodes, self.tail, self.head, flows)
        if -balance[self.source] != self.value or balance[self.sink] != self.value:
            _fail(f"a witness flow has value {int(-balance[self.source])}, not the maximum {self.value}")
        balance[[self.source, self.sink]] = 0
        if balance.any():
            _fail("a witness flow is not conserved at a node")
        np.minimum(self.bound, flows, out=self.bound)
        self.flows_checked += 1

    def cut(self, arc: int, source_side: np.ndarray, value_without: int) -> np.ndarray:
        """Check an s-t cut of the network without ``arc`` of capacity ``value_without``.

        Returns
        -------
        ndarray of int64
            The arcs leaving the source side (``arc`` itself excluded).
        """
        if not source_side[self.source] or source_side[self.sink]:
            _fail(f"the cut for arc {arc} does not separate the source from the sink")
        crossing = source_side[self.tail] & ~source_side[self.head]
        crossing[arc] = False
        if self.unlimited is not None and (crossing & self.unlimited).any():
            _fail(f"the cut for arc {arc} contains an arc without a capacity limit")
        arcs = np.flatnonzero(crossing)
        capacity = int(self.capacity[arcs].sum())
        if capacity != value_without:
            _fail(f"the cut for arc {arc} has capacity {capacity}, not the value without it {value_without}")
        self.cut_value[arc] = capacity
        return arcs

    def finish(self, failing: np.ndarray, loss: np.ndarray) -> dict:
        """Check that the witnesses prove every claim: each listed loss is matched by a
        flow (its cut was checked by :meth:`cut`), and every arc not listed is cleared.

        Returns
        -------
        dict
            ``flows_checked``, ``cuts_checked``, ``closures_checked``.
        """
        if self.flows_checked == 0:
            _fail("no maximum flow was checked")
        if not np.array_equal(self.bound[failing], loss):
            i = int(np.flatnonzero(self.bound[failing] != loss)[0])
            _fail(f"arc {int(failing[i])}: loss {int(loss[i])} is not the least flow a checked maximum flow "
                  f"puts on it ({int(self.bound[failing[i]])})")
        if not np.array_equal(self.cut_value[failing], self.value - loss):
            i = int(np.flatnonzero(self.cut_value[failing] != self.value - loss)[0])
            _fail(f"arc {int(failing[i])}: no checked cut shows the value without it is {self.value - int(loss[i])}")
        others = np.ones(self.tail.size, dtype=bool)
        others[failing] = False
        if self.bound[others].any():
            i = int(np.flatnonzero(others & (self.bound != 0))[0])
            _fail(f"arc {i} is not listed, but no checked maximum flow avoids it")
        return {"flows_checked": self.flows_checked, "cuts_checked": int(failing.size),
                "closures_checked": int(self.tail.size)}
