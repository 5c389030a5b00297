"""Published schemes as recipes; sources stand beside each (see models/baselines.py)."""

from __future__ import annotations

import pytest
from numpy.testing import assert_allclose

from models import BASELINES, Profile, baseline, evaluate, werner


@pytest.mark.parametrize(
    "name, depth, notation",
    [
        ("bbpssw", 2, "sZ~^2"),  # Bennett et al., Phys. Rev. Lett. 76, 722 (1996)
        ("dejmps", 3, "sY^3"),  # Deutsch et al., Phys. Rev. Lett. 77, 2818 (1996)
        ("pumping", 4, "pY^4"),  # Duer et al., Phys. Rev. A 59, 169 (1999); rotation from memory
        ("alternating-pumping", 4, "pZ.pX.pZ.pX"),  # from memory
        ("double-selection-pumping", 3, "dpZ.dpX.dpZ"),  # Fujii and Yamamoto 2009, from memory
        ("dejmps", 1, "sY"),
    ],
)
def test_baseline_recipes(name, depth, notation):
    assert baseline(name, depth).notation == notation


def test_every_baseline_names_its_source():
    assert set(BASELINES) == {
        "bbpssw",
        "dejmps",
        "pumping",
        "alternating-pumping",
        "double-selection-pumping",
    }
    for b in BASELINES.values():
        assert any(ch.isdigit() for ch in b.source)  # a journal volume, page, year
        assert baseline(b.name, 2).depth == 2


def test_dejmps_baseline_reproduces_the_published_iteration():
    # Deutsch et al., Phys. Rev. Lett. 77, 2818 (1996), from F = 0.7, iterated
    result = evaluate(baseline("dejmps", 5), Profile(tuple(werner(0.7))))
    assert_allclose(
        [t.fidelity for t in result.trace],
        [0.735294, 0.845946, 0.934395, 0.972004, 0.996964],
        atol=5e-7,
    )


@pytest.mark.parametrize(
    "name, depth, words",
    [
        ("dejmp", 2, "did you mean 'dejmps'"),
        ("pumpin", 2, "did you mean 'pumping'"),
        ("hashing", 2, "Known: bbpssw"),
        ("dejmps", 0, "depth = 0"),
        ("dejmps", 2.5, "depth = 2.5"),
        ("dejmps", True, "depth = True"),
    ],
)
def test_bad_baseline_requests(name, depth, words):
    with pytest.raises(ValueError) as info:
        baseline(name, depth)
    assert words in str(info.value)
