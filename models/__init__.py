"""The exact Bell-diagonal physics of stillroom: pair states, noise, steps."""

from .noise import (
    NodeNoise,
    check_error,
    depolarize,
    memory_decays,
    memory_qubit_twirl_probabilities,
    pauli_channel,
    store,
    store_with_decays,
)
from .rotations import (
    COMPOSE,
    IDENTITY,
    INVERSE,
    PERMUTATIONS,
    ROTATION_NAMES,
    compose,
    inverse,
    rotate,
    rotation_index,
    undetected_label,
)
from .states import (
    BELL_NAMES,
    I,
    X,
    Y,
    Z,
    bell_diagonal,
    bit_flip_pair,
    fidelity,
    from_density_matrix,
    hashing_yield,
    phase_flip_pair,
    twirl_to_werner,
    validate_bell,
    werner,
)
from .steps import (
    DOUBLE_SELECTION,
    TWO_TO_ONE,
    StepCircuit,
    double_selection,
    prepare,
    run_step,
    two_to_one,
)

__all__ = [name for name in dir() if not name.startswith("_")]
