"""Plane channel, uniform inflow developing into plane Poiseuille flow.

Source: the exact (analytic) fully developed solution of the Navier-Stokes equations between
parallel plates, plane Poiseuille flow: with mean velocity U and height H, u(y) = 6 U y (H - y) / H^2, u_max = 1.5 U, dp/dx = -12 nu U / H^2.
"""

from __future__ import annotations

import numpy as np


def test_developed_profile_is_the_poiseuille_parabola(channel_run):
    prof = channel_run.metrics["profile"]  # at x = 0.8 L = 8 H
    y, u = np.array(prof["y"]), np.array(prof["u"])
    exact = 6.0 * y * (1.0 - y)  # U = 1, H = 1
    dev = np.abs(u - exact).max() / 1.5
    assert dev < 0.005, f"profile deviates by {100 * dev:.3f} % of u_max"


def test_pressure_gradient_within_one_percent(channel_run):
    re = channel_run.metrics["reynolds"]
    exact = -12.0 / re  # -12 nu U / H^2 with U = H = 1, nu = 1/Re
    got = channel_run.metrics["pressure_gradient"]
    assert abs(got / exact - 1) < 0.01, f"dp/dx = {got:.5f}, Poiseuille {exact:.5f}"


def test_centreline_velocity_and_development_length(channel_run):
    m = channel_run.metrics
    # u_max = 1.5 U for the parabola
    assert abs(m["centreline_velocity"] / 1.5 - 1) < 0.005
    # laminar entrance length of a plane channel, L_e/H = [0.631^1.6 + (0.0442 Re)^1.6]^(1/1.6)
    # (Durst et al., J. Fluids Eng. 127, 2005; from memory): 2.4 H at Re = 50; a 25 % band
    # since the 99 % point of a slowly levelling curve is sensitive
    re = m["reynolds"]
    le = (0.631**1.6 + (0.0442 * re) ** 1.6) ** (1 / 1.6)
    assert 0.75 * le < m["development_length"] < 1.25 * le, (m["development_length"], le)
