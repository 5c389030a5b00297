"""Bilateral basis rotations as permutations of the X, Y, Z error labels.

A bilateral rotation applies a single-qubit Clifford U at node A and its complex
conjugate U* at node B, which fixes Phi+ and permutes the labels X, Y, Z of a
Bell-diagonal pair. The 24 Cliffords give exactly six distinct permutations.

Naming (our own): a rotation is named by the error label that it moves onto Z.
The parity check that follows compares in the Z basis, so it detects X and Y and
misses Z: the name is therefore the error the rotated check leaves undetected,
which is the same as the Pauli basis in which the check effectively compares.
The capital names are the identity (``Z``), the DEJMPS rotation (``Y``:
Rx(pi/2) at A, Rx(-pi/2) at B, exchanging Y and Z) and the Hadamard-type exchange
of X and Z (``X``, which turns the plain step into the reversed circuit, a
phase-flip check). The lower-case variant ``z``, ``y``, ``x`` misses the same
error but adds an exchange of X and Y after the capital one (``z`` is that
exchange alone). Lower case keeps recipe strings free of shell quoting.

References
----------
1. D. Deutsch et al., Phys. Rev. Lett. 77, 2818 (1996) (the Y <-> Z rotation).
"""

from __future__ import annotations

import numpy as np

from .states import I, X, Y, Z

ROTATION_NAMES = ("Z", "z", "Y", "y", "X", "x")
IDENTITY = 0
# row r: new label of old label k (I, X, Y, Z) under rotation r
PERMUTATIONS = np.array(
    [
        [I, X, Y, Z],  # Z : no gate
        [I, Y, X, Z],  # z : X <-> Y
        [I, X, Z, Y],  # Y : Y <-> Z (DEJMPS)
        [I, Y, Z, X],  # y : X -> Y -> Z -> X
        [I, Z, Y, X],  # X : X <-> Z (Hadamard type)
        [I, Z, X, Y],  # x : X -> Z -> Y -> X
    ],
    dtype=np.intp,
)
# gather table: rotated[..., new] = pair[..., SOURCES[r, new]]
SOURCES = np.argsort(PERMUTATIONS, axis=1)


def rotation_index(name: str) -> int:
    """Index of a rotation from its name (``"Z"``, ``"z"``, ``"Y"``, ...)."""
    try:
        return ROTATION_NAMES.index(name)
    except ValueError:
        raise ValueError(f"rotation {name!r} is not one of {', '.join(ROTATION_NAMES)}") from None


def undetected_label(rotation: int) -> int:
    """The error label (X=1, Y=2, Z=3) that the Z-basis check after ``rotation`` misses."""
    return int(SOURCES[rotation, Z])


def _index_of_permutation(perm) -> int:
    matches = np.flatnonzero((PERMUTATIONS == np.asarray(perm)).all(axis=1))
    return int(matches[0])


def compose(first: int, then: int) -> int:
    """Rotation equal to applying ``first`` and then ``then``.

    Examples
    --------
    >>> ROTATION_NAMES[compose(rotation_index("Y"), rotation_index("z"))]
    'y'
    """
    return _index_of_permutation(PERMUTATIONS[then][PERMUTATIONS[first]])


def inverse(rotation: int) -> int:
    """Rotation that undoes ``rotation``."""
    return _index_of_permutation(SOURCES[rotation])


COMPOSE = np.array([[compose(a, b) for b in range(6)] for a in range(6)], dtype=np.intp)
INVERSE = np.array([inverse(r) for r in range(6)], dtype=np.intp)


def rotate(pair, rotation) -> np.ndarray:
    """Relabel pairs by a bilateral rotation (no gate noise).

    Parameters
    ----------
    pair : array_like, shape (..., 4)
    rotation : int or int array broadcastable to ``pair.shape[:-1]``

    Returns
    -------
    ndarray, shape (..., 4)
        ``out[..., PERMUTATIONS[r, k]] = pair[..., k]``.
    """
    p = np.asarray(pair, dtype=float)
    r = np.asarray(rotation, dtype=np.intp)
    if r.ndim == 0:
        return p[..., SOURCES[r]]
    index = np.broadcast_to(SOURCES[r], p.shape)
    return np.take_along_axis(p, index, axis=-1)
