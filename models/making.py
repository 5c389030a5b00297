"""In which order a step's inputs are made, and the memory that order needs.

Shared by the recipe dataclasses (memory per node), the canonical form (which
inputs wait) and the evaluators (which inputs decay while others are made).
"""

from __future__ import annotations


def making_order(memories) -> tuple[int, ...]:
    """Order in which a step's inputs are made, from their memory needs (qubits per node).

    Largest need first, which minimises the qubits held at once; ties keep input
    order, so the kept pair (input 0) comes first among equals.

    Examples
    --------
    >>> making_order([2, 1]), making_order([2, 3, 3])
    ((0, 1), (1, 2, 0))
    """
    return tuple(sorted(range(len(memories)), key=lambda i: -memories[i]))


def memory_needed(memories) -> int:
    """Qubits per node for a step whose inputs need ``memories``, made in :func:`making_order`.

    ``max_j (memories[order[j]] + j)``: while input ``order[j]`` is made, the ``j``
    inputs made before it are stored.

    Examples
    --------
    >>> memory_needed([1, 1]), memory_needed([3, 3]), memory_needed([2, 1, 1])
    (2, 4, 3)
    """
    return max(memories[i] + j for j, i in enumerate(making_order(memories)))
