"""Three- and two-level procedures against Celik et al. (2008) Table 1 and analytic power laws."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from studyflow.analysis.richardson import (
    DIVERGENT,
    INDETERMINATE,
    MONOTONIC,
    OSCILLATORY,
    apparent_order,
    asymptotic_ratio,
    three_level,
    two_level,
)
from studyflow.analysis.sizes import representative_size

# Celik, Ghia, Roache, Freitas, Coleman, Raad, J. Fluids Eng. 130 (2008) 078001, Table 1.
# All inputs and printed outputs below are FROM MEMORY, not checked against the paper:
# column 1 (reattachment length, monotonic), column 2 (axial velocity at x/H = 8, y = 0.0526),
# column 3 (axial velocity at x/H = 8, y = 0.811, oscillatory). The flow is two-dimensional
# (backward-facing step), so h = (1/N)^(1/2). The recalled outputs were written down before
# running this code; the computation agrees with all of them, which makes a slip of memory in
# the inputs unlikely but not impossible.
CELIK_TABLE_1 = [
    # cells (fine, medium, coarse), phi (fine, medium, coarse), p, phi_ext21, e_a21 %, e_ext21 %, GCI_fine21 %
    ((18000, 8000, 4500), (6.063, 5.972, 5.863), 1.53, 6.1685, 1.5, 1.7, 2.2),
    ((18000, 4500, 980), (10.7880, 10.7250, 10.6050), 0.75, 10.8801, 0.6, None, 1.1),
    ((18000, 4500, 980), (6.0042, 5.9624, 6.0909), 1.51, 6.0269, 0.7, 0.38, 0.47),
]


def _digits(printed: float) -> float:
    """Half a unit in the last printed digit: the tolerance of 'reproduced to printed precision'."""
    text = repr(printed)
    decimals = len(text.split(".")[1]) if "." in text else 0
    return 0.5 * 10.0 ** (-decimals) + 1e-12


def test_celik_table_1_all_columns_vectorised():
    cells = np.array([row[0] for row in CELIK_TABLE_1], dtype=float)
    phi = np.array([row[1] for row in CELIK_TABLE_1])
    res = three_level(representative_size(cells, dim=2), phi)
    for i, (_, _, p, ext, ea, eext, gci) in enumerate(CELIK_TABLE_1):
        assert res.order[i] == pytest.approx(p, abs=_digits(p)), f"column {i + 1}: p"
        assert res.extrapolated[i] == pytest.approx(ext, abs=_digits(ext)), f"column {i + 1}: phi_ext21"
        assert 100 * res.e_a[i] == pytest.approx(ea, abs=_digits(ea)), f"column {i + 1}: e_a21"
        if eext is not None:
            assert 100 * res.e_ext[i] == pytest.approx(eext, abs=_digits(eext)), f"column {i + 1}: e_ext21"
        assert 100 * res.gci_fine[i] == pytest.approx(gci, abs=_digits(gci)), f"column {i + 1}: GCI_fine21"
    # Column 2's e_ext21 is recalled only as "between 0.8 % and 0.9 %" (from memory, uncertain).
    assert 0.8 <= 100 * res.e_ext[1] <= 0.9
    # Refinement ratios printed in Table 1 (from memory): 1.5, 1.333 and 2.0, 2.143.
    assert res.r21 == pytest.approx([1.5, 2.0, 2.0], abs=5e-4)
    assert res.r32 == pytest.approx([1.333, 2.143, 2.143], abs=5e-4)
    # Column 3 is the paper's oscillatory example (sign change of the differences).
    assert list(res.convergence.kind) == [MONOTONIC, MONOTONIC, OSCILLATORY]


def test_celik_table_1_level_order_does_not_matter():
    cells = np.array([(4500, 18000, 8000)], dtype=float)
    phi = np.array([(5.863, 6.063, 5.972)])
    res = three_level(representative_size(cells, dim=2), phi)
    assert res.order[0] == pytest.approx(1.53, abs=0.005)  # Celik et al. 2008 Table 1, from memory


# Exact data phi = phi0 + C h^p (analytic): the procedure must return p and phi0 exactly.
@settings(max_examples=150, deadline=None)
@given(
    p=st.floats(0.5, 4.0),
    r21=st.floats(1.1, 4.0),
    r32=st.floats(1.1, 4.0),
    h1=st.floats(0.2, 1.0),
    phi0=st.floats(0.5, 5.0),
    c=st.floats(0.5, 5.0),
    sign_c=st.sampled_from([-1.0, 1.0]),
    sign_phi=st.sampled_from([-1.0, 1.0]),
    perm=st.permutations([0, 1, 2]),
)
def test_exact_power_law_gives_order_and_limit(p, r21, r32, h1, phi0, c, sign_c, sign_phi, perm):
    h = np.array([h1, h1 * r21, h1 * r21 * r32])
    # Keep the smallest difference well above double-precision rounding of phi (conditioning).
    assume(c * h1**p * (r21**p - 1) > 1e-4 * (phi0 + c * h[-1] ** p))
    phi = sign_phi * phi0 + sign_c * c * h**p
    res = three_level(h[None, perm], phi[None, perm])
    assert res.convergence.kind[0] == MONOTONIC
    assert res.order[0] == pytest.approx(p, rel=1e-9)
    assert res.extrapolated[0] == pytest.approx(sign_phi * phi0, rel=1e-9)
    # Roache's check for exact data with relative GCIs: GCI23/(r21^p GCI12) = |phi1/phi2| (derived).
    assert res.asymptotic_ratio[0] == pytest.approx(abs(phi[0] / phi[1]), rel=1e-8)
    # Permuted order gives the same answer as sorted input.
    ref = three_level(h[None, :], phi[None, :])
    assert res.order[0] == pytest.approx(ref.order[0], rel=1e-12)
    assert res.U[0] == pytest.approx(ref.U[0], rel=1e-12)


def test_fixed_point_fallback_on_strongly_unequal_ratios():
    # r21 = 1.1, r32 = 4: the fixed-point map is not a contraction (|q'| > ln r21) - analytic data.
    p, h = 2.0, np.array([[1.0, 1.1, 4.4]])
    phi = 1.0 + h**p
    res = apparent_order(phi[:, 1] - phi[:, 0], phi[:, 2] - phi[:, 1], np.array([1.1]), np.array([4.0]))
    assert res.order[0] == pytest.approx(p, rel=1e-12)
    assert res.iterations[0] == -1


def test_equal_ratios_direct_formula():
    # With r21 = r32 = r, q = 0 and p = ln(eps32/eps21)/ln r (Celik et al. 2008, Eq. 3a with q = 0;
    # numbering from memory).
    phi = np.array([[1.01, 1.04, 1.16]])
    res = three_level(np.array([[1.0, 2.0, 4.0]]), phi)
    assert res.order[0] == pytest.approx(np.log(0.12 / 0.03) / np.log(2.0), rel=1e-13)
    assert res.iterations[0] <= 2


# Classes from R = eps21/eps32 (Stern et al., J. Fluids Eng. 123 (2001) 793-802, from memory).
@pytest.mark.parametrize(
    "phi,kind",
    [
        ((1.0, 1.1, 0.8), OSCILLATORY),  # eps21 = 0.1, eps32 = -0.3: R = -1/3, sign change, |R| < 1
        ((1.0, 1.3, 1.4), DIVERGENT),  # R = 0.3/0.1 = 3 > 1: differences grow on refinement
        ((1.0, 1.3, 1.1), DIVERGENT),  # R = 0.3/-0.2 = -1.5: oscillatory divergence
        ((2.0, 2.0, 2.0), INDETERMINATE),  # constant
        ((2.0, 2.0 + 1e-15, 2.1), INDETERMINATE),  # one difference at rounding level
    ],
)
def test_convergence_classes_without_exception(phi, kind):
    h = np.array([[1.0, 2.0, 4.0]])
    with np.errstate(all="raise"):
        res = three_level(h, np.array([phi]))
    assert res.convergence.kind[0] == kind
    if kind in (DIVERGENT, INDETERMINATE):
        assert np.isnan(res.order[0]) and np.isnan(res.U[0])
    else:
        assert np.isfinite(res.order[0]) and res.U[0] > 0
    assert res.convergence.flat[0] == (phi == (2.0, 2.0, 2.0))


def test_noise_makes_small_differences_indeterminate():
    h = np.array([[1.0, 2.0, 4.0]] * 2)
    phi = np.array([[1.0, 1.001, 1.005]] * 2)
    res = three_level(h, phi, noise=np.array([0.0, 0.002]))  # second group: noise 2e-3 > eps21
    assert list(res.convergence.kind) == [MONOTONIC, INDETERMINATE]


def test_asymptotic_ratio_is_roache_formula():
    # GCI23 / (r^p GCI12), Roache 1998 (from memory); with the formal order on exact data and
    # absolute GCIs it is exactly 1 (analytic).
    r, p = 2.0, 2.0
    gci12, gci23 = 0.01, 0.04
    assert asymptotic_ratio(gci12, gci23, r, p) == pytest.approx(1.0)
    assert asymptotic_ratio(gci12, 0.02, r, p) == pytest.approx(0.5)


def test_two_level_uses_formal_order_and_fs3():
    # Exact second-order data on two levels: phi_ext with p_f = 2 is exact; GCI = 3 e_a/(r^2 - 1)
    # (Roache 1994, Fs = 3, from memory).
    h = np.array([[0.1, 0.2]])
    phi = 1.0 + 3.0 * h**2
    res = two_level(h, phi, formal_order=2.0)
    assert res.extrapolated[0] == pytest.approx(1.0, rel=1e-13)
    e_a = abs((phi[0, 1] - phi[0, 0]) / phi[0, 0])
    assert res.gci_fine[0] == pytest.approx(3.0 * e_a / 3.0, rel=1e-13)
    assert res.U[0] == pytest.approx(3.0 * abs(phi[0, 1] - phi[0, 0]) / 3.0, rel=1e-13)
