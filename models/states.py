"""Bell-diagonal pair states in the Pauli-frame order (I, X, Y, Z).

A pair is a probability vector ``p`` of shape ``(..., 4)``: entry ``k`` is the
weight of ``(1 ⊗ sigma_k)|Phi+>``, the Pauli applied to node B's qubit, so the
order is (Phi+, Psi+, Psi-, Phi-) and the fidelity with Phi+ is ``p[..., 0]``.

References
----------
1. C. H. Bennett, D. P. DiVincenzo, J. A. Smolin and W. K. Wootters,
   Phys. Rev. A 54, 3824 (1996) (Bell-diagonal states, twirling, hashing).
"""

from __future__ import annotations

import numpy as np

I, X, Y, Z = 0, 1, 2, 3  # noqa: E741 (the Pauli labels' own names)
LABELS = ("I", "X", "Y", "Z")
BELL_NAMES = ("Phi+", "Psi+", "Psi-", "Phi-")
# binary (x, z) labels of I, X, Y, Z
X_BIT = np.array([0, 1, 1, 0])
Z_BIT = np.array([0, 0, 1, 1])
SUM_TOLERANCE = 1e-9


def label_from_bits(x, z):
    """Pauli-frame index of the binary label (x, z); works on integer arrays."""
    x = np.asarray(x)
    z = np.asarray(z)
    return np.where(x == 0, np.where(z == 0, I, Z), np.where(z == 0, X, Y))


def validate_bell(weights, name: str = "bell") -> np.ndarray:
    """Return ``weights`` as a float array of shape ``(..., 4)``, or raise ``ValueError``.

    The message names the offending entry and the allowed range: each entry must
    lie in [0, 1] and each vector must sum to 1 within 1e-9.
    """
    p = np.asarray(weights, dtype=float)
    if p.ndim == 0 or p.shape[-1] != 4:
        raise ValueError(
            f"{name} has shape {p.shape}; a Bell-diagonal pair needs 4 weights "
            f"in the order {', '.join(BELL_NAMES)}"
        )
    bad = ~np.isfinite(p) | (p < 0) | (p > 1)
    if bad.any():
        idx = tuple(int(i) for i in np.argwhere(bad)[0])
        k = idx[-1]
        raise ValueError(
            f"{name}[{k}] ({BELL_NAMES[k]}) = {p[idx]!r} is outside [0, 1]; "
            "each Bell weight is a probability"
        )
    total = p.sum(axis=-1)
    off = np.abs(total - 1) > SUM_TOLERANCE
    if np.any(off):
        t = np.atleast_1d(total)[np.atleast_1d(off)][0]
        raise ValueError(
            f"{name} sums to {t!r}; the four Bell weights must sum to 1 (within {SUM_TOLERANCE:g})"
        )
    return p


def bell_diagonal(weights) -> np.ndarray:
    """A validated Bell-diagonal pair from its weights in the order (I, X, Y, Z).

    Examples
    --------
    >>> bell_diagonal([0.7, 0.1, 0.1, 0.1])
    array([0.7, 0.1, 0.1, 0.1])
    """
    return validate_bell(weights).copy()


def werner(fidelity) -> np.ndarray:
    """Werner pair of fidelity ``F``: weights (F, (1-F)/3, (1-F)/3, (1-F)/3), shape ``(..., 4)``.

    Examples
    --------
    >>> werner(0.7)
    array([0.7, 0.1, 0.1, 0.1])
    """
    f = _check_fidelity(fidelity)
    r = (1.0 - f) / 3.0
    return np.stack([f, r, r, r], axis=-1)


def bit_flip_pair(fidelity) -> np.ndarray:
    """Pair with only Phi+ (weight F) and Psi+ (the X label, weight 1 - F)."""
    f = _check_fidelity(fidelity)
    zero = np.zeros_like(f)
    return np.stack([f, 1.0 - f, zero, zero], axis=-1)


def phase_flip_pair(fidelity) -> np.ndarray:
    """Pair with only Phi+ (weight F) and Phi- (the Z label, weight 1 - F)."""
    f = _check_fidelity(fidelity)
    zero = np.zeros_like(f)
    return np.stack([f, zero, zero, 1.0 - f], axis=-1)


def fidelity(pair) -> np.ndarray:
    """Fidelity with Phi+ of pairs of shape ``(..., 4)``; returns shape ``(...)``."""
    return np.asarray(pair)[..., I]


def twirl_to_werner(pair) -> np.ndarray:
    """Depolarising (Werner) twirl: keep the fidelity, spread the rest evenly.

    This is the re-twirl of BBPSSW (Bennett et al., PRL 76, 722 (1996)).
    """
    p = np.asarray(pair, dtype=float)
    f = p[..., I]
    r = (1.0 - f) / 3.0
    return np.stack([f, r, r, r], axis=-1)


def _bell_vectors() -> np.ndarray:
    """Columns: |B_k> = (1 ⊗ sigma_k)|Phi+> in the basis |00>, |01>, |10>, |11>."""
    paulis = [
        np.eye(2),
        np.array([[0, 1], [1, 0]]),
        np.array([[0, -1j], [1j, 0]]),
        np.diag([1.0, -1.0]),
    ]
    phi_plus = np.array([1, 0, 0, 1]) / np.sqrt(2)
    return np.stack([np.kron(np.eye(2), s) @ phi_plus for s in paulis], axis=-1)


BELL_VECTORS = _bell_vectors()


def from_density_matrix(rho) -> tuple[np.ndarray, float]:
    """Bilateral twirl of a two-qubit density matrix into a Bell-diagonal pair.

    Parameters
    ----------
    rho : array_like, shape (4, 4)
        Density matrix in the basis |00>, |01>, |10>, |11> (node A's qubit first).

    Returns
    -------
    pair : ndarray, shape (4,)
        The Bell diagonal <B_k| rho |B_k> in the order (I, X, Y, Z).
    discarded : float
        Hilbert-Schmidt norm of the off-diagonal part in the Bell basis, which the
        twirl removes (0 for a state that is already Bell-diagonal).

    Examples
    --------
    >>> pair, lost = from_density_matrix(np.diag([0.5, 0, 0, 0.5]))
    >>> pair.round(6).tolist(), round(lost, 6)
    ([0.5, 0.0, 0.0, 0.5], 0.0)
    """
    rho = np.asarray(rho, dtype=complex)
    if rho.shape != (4, 4):
        raise ValueError(f"rho has shape {rho.shape}; a two-qubit density matrix is 4 x 4")
    in_bell = BELL_VECTORS.conj().T @ rho @ BELL_VECTORS
    diag = np.real(np.diag(in_bell)).copy()
    off = in_bell - np.diag(np.diag(in_bell))
    diag = np.clip(diag, 0.0, None)
    return validate_bell(diag / diag.sum(), "twirled rho"), float(np.linalg.norm(off))


def hashing_yield(pair) -> np.ndarray:
    """Hashing yield 1 - S(p), S the Shannon entropy in bits of the four weights.

    The rate of the hashing protocol with perfect operations (Bennett, DiVincenzo,
    Smolin and Wootters, Phys. Rev. A 54, 3824 (1996)); negative values mean that
    hashing alone cannot distil. Shape ``(..., 4)`` -> ``(...)``.

    Examples
    --------
    >>> round(float(hashing_yield(werner(0.9))), 6)
    0.372508
    """
    p = np.asarray(pair, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        terms = np.where(p > 0, -p * np.log2(np.where(p > 0, p, 1.0)), 0.0)
    return 1.0 - terms.sum(axis=-1)


def _check_fidelity(fidelity) -> np.ndarray:
    f = np.asarray(fidelity, dtype=float)
    if np.any(~np.isfinite(f) | (f < 0) | (f > 1)):
        bad = np.atleast_1d(f)[np.atleast_1d(~np.isfinite(f) | (f < 0) | (f > 1))][0]
        raise ValueError(f"fidelity = {bad!r} is outside [0, 1]")
    return f
