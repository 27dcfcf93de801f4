"""Flat plate at Re_L = 1e4 against the Blasius boundary layer.

Sources: Blasius, Z. Math. Phys. 56 (1908); the similarity equation is solved in conftest with
scipy.integrate.solve_bvp. Reference numbers: f''(0) = 0.332057 and f'(eta) at eta = 1..5
(0.32979, 0.62977, 0.84605, 0.95552, 0.99155) from Howarth's table as printed in White,
"Viscous Fluid Flow"; Cf = 0.664/sqrt(Re_x), delta* = 1.7208 x/sqrt(Re_x)
follow from f''(0) and lim (eta - f). The drag correction 2.326/Re_L for the leading edge is
Imai's (J. Aeronaut. Sci. 24, 1957), quoted from memory.
"""

from __future__ import annotations

import numpy as np


def test_own_blasius_solution_matches_published_values(blasius):
    eta, f, fp, fpp = blasius
    # Howarth table as printed in White, Viscous Fluid Flow: f''(0) = 0.332057
    assert abs(fpp[0] - 0.332057) < 2e-6
    # same table: f'(eta) at eta = 1..5
    for e, ref in zip((1, 2, 3, 4, 5), (0.32979, 0.62977, 0.84605, 0.95552, 0.99155)):
        assert abs(np.interp(e, eta, fp) - ref) < 2e-5, e
    # delta*/(x/sqrt(Re_x)) = lim (eta - f) = 1.7208 (White, ibid.)
    assert abs((eta[-1] - f[-1]) - 1.7208) < 2e-4


def test_skin_friction_within_one_percent_of_blasius(plate_fine):
    st = plate_fine.metrics["stations"]
    re_l = plate_fine.metrics["drag"]["reynolds"]
    for x, cf in zip(st["x"], st["cf"]):
        # Blasius: Cf = 0.664 / sqrt(Re_x) (White, Viscous Fluid Flow)
        ref = 0.664 / np.sqrt(x * re_l)
        assert abs(cf / ref - 1) < 0.01, f"x/L = {x}: Cf = {cf:.5f}, Blasius {ref:.5f}"
    # the whole distribution, not only the stations, stays within 1 % on 0.2 <= x/L <= 0.9
    xs = np.array(plate_fine.metrics["cf"]["x"])
    cf = np.array(plate_fine.metrics["cf"]["values"])
    sel = (xs >= 0.2) & (xs <= 0.9)
    dev = np.abs(cf[sel] / (0.664 / np.sqrt(xs[sel] * re_l)) - 1)
    assert dev.max() < 0.01, f"largest Cf deviation {dev.max():.4f} at x/L = {xs[sel][dev.argmax()]:.3f}"


def test_velocity_profile_at_mid_plate_matches_blasius(plate_fine, blasius):
    eta_b, _, fp, _ = blasius
    prof = next(p for p in plate_fine.metrics["profiles"] if abs(p["x"] - 0.5) < 1e-12)
    eta = np.array(prof["eta"])
    u = np.array(prof["u"])
    sel = eta <= 10.0
    # u/U = f'(eta) (Blasius similarity); tolerance 0.005 in u/U
    dev = np.abs(u[sel] - np.interp(eta[sel], eta_b, fp))
    assert dev.max() < 0.005, f"largest |u/U - f'| = {dev.max():.4f} at eta = {eta[sel][dev.argmax()]:.2f}"
    assert sel.sum() >= 20  # the layer is resolved by enough cells for the check to mean something


def test_displacement_thickness_within_two_percent(plate_fine):
    st = plate_fine.metrics["stations"]
    re_l = plate_fine.metrics["drag"]["reynolds"]
    for x, ds, th, h in zip(st["x"], st["delta_star"], st["theta"], st["shape_factor"]):
        # Blasius: delta* = 1.7208 x / sqrt(Re_x) (White, Viscous Fluid Flow)
        ref = 1.7208 * x / np.sqrt(x * re_l)
        assert abs(ds / ref - 1) < 0.02, f"x/L = {x}: delta* = {ds:.5f}, Blasius {ref:.5f}"
        # Blasius: theta = 0.664 x / sqrt(Re_x), H = 2.59 (same source); looser, common practice
        assert abs(th / (0.664 * x / np.sqrt(x * re_l)) - 1) < 0.03
        assert abs(h - 2.59) < 0.05


def test_drag_coefficient_with_leading_edge_correction(plate_fine):
    re_l = plate_fine.metrics["drag"]["reynolds"]
    cd = plate_fine.metrics["drag"]["cd"]
    # 1.328/sqrt(Re_L) (Blasius) + 2.326/Re_L (leading-edge correction, Imai 1957; from memory)
    ref = 1.328 / np.sqrt(re_l) + 2.326 / re_l
    assert abs(cd / ref - 1) < 0.005, f"C_D = {cd:.6f}, reference {ref:.6f} ({100 * (cd / ref - 1):+.2f} %)"
    # and the plain Blasius value alone is not good enough at this Re: the correction matters
    assert abs(cd / (1.328 / np.sqrt(re_l)) - 1) > 0.01


def test_a_confined_domain_gives_a_drag_error_refinement_does_not_remove():
    # Why the defaults: with a fixed-velocity inlet 0.25 L ahead of the leading edge and a slip
    # top 1 L up, blockage speeds the outer flow up; the drag stays several per cent above the
    # reference (Blasius + Imai's 2.326/Re_L, from memory) however fine the mesh
    from fv_support import solve_case

    ref = 1.328 / np.sqrt(1.0e4) + 2.326 / 1.0e4
    err = []
    for n in (64, 128):
        r = solve_case({"case": {"kind": "plate"}, "mesh": {"nx": n, "ny": n // 2},
                        "domain": {"upstream": 0.25, "height": 1.0, "inlet": "velocity", "top": "slip"}})
        err.append(r.metrics["drag"]["cd"] / ref - 1)
    assert min(err) > 0.03, err
    assert err[1] > 0.8 * err[0], err  # halving the cells barely moves it: a domain error
