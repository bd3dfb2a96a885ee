"""Direct tests of the lumped water node (layers.contents.WaterNode).

Hand values use the module's constants as their sources give them: water
density 1000 kg/m3, specific heats 4190 J/(kg K) (water at 10 degC) and
2000 J/(kg K) (ice at 0 degC), ISO 10456:2007 Table 3 (read in the ``ht``
package's tabulation, see tests/test_materials.py); latent heat of fusion
333.6 kJ/kg, CRC Handbook of Chemistry and Physics (from memory, as the module
says).  The enthalpy law is the three-segment form of the module docstring
(liquid C_w T, mushy -f L', ice -L' + C_i T), written out again here by hand so
that scipy's root finder solves an equation not taken from the code.

The freeze-time checks use the closed forms of lumped Newton cooling,
t = C/G ln((T0 - T_air)/(T1 - T_air)) (Incropera et al., Fundamentals of Heat
and Mass Transfer, 6th ed., sec. 5.2, lumped capacitance; from memory), and of
freezing at 0 degC under a constant heat loss, t = L' R'/(0 - T_air) (the
form of ISO 12241 sec. 6.2 with the whole contents frozen; from memory).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import brentq

from layers.contents import WaterNode

RADIUS = 0.010  # bore radius [m]: a 22 x 1 mm copper tube has a 20 mm bore

# Hand values per metre of pipe (computed from the constants above):
MASS = 1000.0 * math.pi * RADIUS**2          # 0.3141592653589793 kg/m
C_WATER = MASS * 4190.0                      # 1316.33 J/(m K)
C_ICE = MASS * 2000.0                        # 628.32 J/(m K)
LATENT = MASS * 333.6e3                      # 104803.5 J/m


@pytest.fixture
def node() -> WaterNode:
    return WaterNode.for_bore("cylinder", RADIUS)


def temperature_of_enthalpy(h: float) -> float:
    """T(H) [degC] from the piecewise law, written independently of the module."""
    if h > 0.0:
        return h / C_WATER
    if h >= -LATENT:
        return 0.0
    return (h + LATENT) / C_ICE


# ---------------------------------------------------------------------- hand values


def test_mass_heat_capacities_and_latent_heat_per_metre(node):
    # Round-off: one product of four numbers, 1e-14 relative is ~50 ulp.
    assert node.volume == pytest.approx(math.pi * 1e-4, rel=1e-14)
    assert node.mass == pytest.approx(0.3141592653589793, rel=1e-14)
    assert node.c_water == pytest.approx(1316.3273218541232, rel=1e-14)
    assert node.c_ice == pytest.approx(628.3185307179587, rel=1e-14)
    # 0.31416 kg/m x 333.6 kJ/kg = 104.80 kJ/m to freeze a metre of this pipe
    assert node.latent == pytest.approx(104803.53092375, rel=1e-12)


def test_sphere_holds_four_thirds_pi_r_cubed():
    sphere = WaterNode.for_bore("sphere", 0.5)
    assert sphere.volume == pytest.approx(4.0 / 3.0 * math.pi * 0.125, rel=1e-14)
    assert sphere.mass == pytest.approx(523.5987755982989, rel=1e-14)  # kg, computed


# ---------------------------------------------------------------------- enthalpy and state


def test_enthalpy_hand_values(node):
    # Round-off: each is one product or sum of a few terms.
    assert node.enthalpy(10.0) == pytest.approx(10.0 * C_WATER, rel=1e-14)
    assert node.enthalpy(0.0, 0.25) == pytest.approx(-0.25 * LATENT, rel=1e-14)
    assert node.enthalpy(-5.0) == pytest.approx(-LATENT - 5.0 * C_ICE, rel=1e-14)


@pytest.mark.parametrize(
    "temperature, ice",
    [(80.0, 0.0), (4.0, 0.0), (1e-6, 0.0), (0.0, 0.0), (0.0, 0.3), (0.0, 1.0), (-1e-6, 1.0), (-2.5, 1.0), (-40.0, 1.0)],
)
def test_enthalpy_state_round_trip(node, temperature, ice):
    # Round-off: a multiplication and a division by the same capacity, 1e-12
    # relative to the enthalpy scale L' (the mushy ice fraction is -H/L').
    h = node.enthalpy(temperature, ice)
    t, f = node.state(h)
    assert float(t) == pytest.approx(temperature, abs=1e-12 * LATENT / C_ICE)
    assert float(f) == pytest.approx(ice, abs=1e-12)


def test_state_is_vectorised_and_matches_the_hand_law(node):
    h = np.linspace(-2.0 * LATENT, 0.5 * LATENT, 1001)
    t, f = node.state(h)
    assert t.shape == f.shape == h.shape
    expected = np.array([temperature_of_enthalpy(x) for x in h])
    np.testing.assert_allclose(t, expected, rtol=1e-14, atol=1e-14)
    np.testing.assert_allclose(f, np.clip(-h / LATENT, 0.0, 1.0), rtol=1e-14, atol=1e-14)


def test_state_is_continuous_at_zero_and_at_full_ice(node):
    # One joule per metre either side of each kink moves T by at most
    # 1/C_ice = 1.6e-3 K and the ice fraction by 1/L' = 1e-5: continuity, no jump.
    for kink in (0.0, -LATENT):
        t, f = node.state(np.array([kink - 1.0, kink, kink + 1.0]))
        assert np.all(np.abs(np.diff(t)) <= 1.0 / C_ICE * (1 + 1e-9))
        assert np.all(np.abs(np.diff(f)) <= 1.0 / LATENT * (1 + 1e-9))
    t, f = node.state(np.array([0.0, -LATENT]))
    np.testing.assert_array_equal(t, [0.0, 0.0])
    np.testing.assert_allclose(f, [0.0, 1.0], rtol=0, atol=1e-15)


# ---------------------------------------------------------------------- solve


# (slope [J K-1], target root H [J]) in each segment and on the kinks
ROOTS = [
    (0.0, 12000.0),
    (50.0, 30000.0),            # liquid, 22.8 degC
    (5000.0, 1.0),              # liquid, barely
    (50.0, -1.0),               # mushy, barely
    (50.0, -0.5 * LATENT),      # mushy
    (1e6, -0.9 * LATENT),       # mushy, stiff
    (50.0, -LATENT - 1.0),      # ice, barely
    (50.0, -LATENT - 6000.0),   # ice, -9.5 degC
    (1e6, -1.3 * LATENT),       # ice, stiff
    (50.0, 0.0),                # the liquid/mushy kink
    (50.0, -LATENT),            # the mushy/ice kink
]


@pytest.mark.parametrize("slope, root", ROOTS)
def test_solve_returns_the_root_in_each_segment(node, slope, root):
    # H + slope T(H) = rhs has exactly one root (its left side is strictly
    # increasing). The reference is brentq on the hand law, bracketed wide.
    # Tolerances: against the planted root, 1e-12 of the size of the terms
    # (|rhs| + L'), i.e. round-off in the module's two-operation closed form;
    # against brentq, that plus brentq's own bound 2 (xtol + rtol |H|).
    rhs = root + slope * temperature_of_enthalpy(root)
    scale = abs(rhs) + LATENT
    xtol, rtol = 1e-9, 4 * np.finfo(float).eps
    expected = brentq(
        lambda h: h + slope * temperature_of_enthalpy(h) - rhs, -5.0 * scale, 5.0 * scale, xtol=xtol, rtol=rtol
    )
    got = node.solve(slope, rhs)
    assert got == pytest.approx(root, abs=1e-12 * scale)
    assert got == pytest.approx(expected, abs=1e-12 * scale + 2 * (xtol + rtol * abs(expected)))


def test_solve_is_continuous_across_the_kinks(node):
    # The root is a continuous, increasing function of rhs; a 1e-6 J change of rhs
    # either side of each kink moves the root by no more than 1e-6 J (the slope
    # of root against rhs is 1/(1 + slope dT/dH) <= 1), plus round-off.
    slope = 200.0
    for kink in (0.0, -LATENT):
        rhs_at_kink = kink + slope * temperature_of_enthalpy(kink)
        roots = [node.solve(slope, rhs_at_kink + d) for d in (-1e-6, 0.0, 1e-6)]
        assert roots[0] <= roots[1] <= roots[2]
        assert roots[2] - roots[0] <= 2e-6 + 1e-12 * LATENT


# ---------------------------------------------------------------------- freezing in a cold room


def march_backward_euler(node: WaterNode, g: float, t_air: float, t0: float, dt: float, until_ice: float):
    """Backward Euler on the enthalpy, H' = G (T_air - T(H)), with WaterNode.solve.

    Each step solves H_new + dt G T(H_new) = H_old + dt G T_air.  Returns the
    times at which T first reaches 0 degC and the ice fraction first reaches
    ``until_ice`` [s], each located within its step by linear interpolation.
    """
    h = node.enthalpy(t0)
    time = 0.0
    reached_zero = None
    while True:
        h_new = node.solve(dt * g, h + dt * g * t_air)
        t_new, ice_new = node.state(h_new)
        if reached_zero is None and float(t_new) <= 0.0:
            # the liquid stretch of the step ends at H = 0
            reached_zero = time + dt * h / (h - h_new)
        if float(ice_new) >= until_ice:
            target = -until_ice * node.latent
            return reached_zero, time + dt * (h - target) / (h - h_new)
        h = h_new
        time += dt


def test_time_to_zero_and_to_freeze_match_lumped_closed_forms(node):
    # Water at 10 degC, air at -10 degC, G = 0.2 W/(m K) (R' = 5 m K/W: about
    # 20 mm of insulation on a 22 mm tube).
    g, t_air, t0 = 0.2, -10.0, 10.0
    # Newton cooling (closed form): t = C_w/G ln((T0 - Ta)/(0 - Ta)) = 6581.6 s x ln 2
    t_zero = C_WATER / g * math.log((t0 - t_air) / (0.0 - t_air))
    # Then freezing half the water at 0 degC under a constant loss G (0 - Ta):
    # t = 0.5 L' / (G (0 - Ta)) = 26,200.9 s (closed form)
    t_half = t_zero + 0.5 * LATENT / (g * (0.0 - t_air))
    dt = 2.0
    got_zero, got_half = march_backward_euler(node, g, t_air, t0, dt, until_ice=0.5)
    # Tolerance: backward Euler's first-order error. Its decay factor
    # 1/(1 + dt/tau) per step stretches the time to a level by
    # (dt/tau)/ln(1 + dt/tau) = 1 + dt/(2 tau) + O(dt^2), with
    # tau = C_w/G = 6582 s: 0.69 s at t = 4562 s. Twice that estimate leaves
    # room for the O(dt^2) terms and for the crossing located by linear
    # interpolation within its step.
    first_order = t_zero * dt / (2.0 * C_WATER / g)
    assert got_zero == pytest.approx(t_zero, abs=2.0 * first_order)
    # On the plateau T = 0 and the loss is constant, so backward Euler is exact
    # there: the freezing stretch carries only the error of the liquid one.
    assert got_half == pytest.approx(t_half, abs=2.0 * first_order)


def test_time_to_zero_error_is_first_order_in_the_step(node):
    # Halving the step halves the error of the liquid stretch (first-order
    # scheme); the ratio of errors at dt = 60 s and 30 s must lie in [1.6, 2.4]
    # (asymptotically 2, the interpolated crossing adds O(dt^2) terms).
    g, t_air, t0 = 0.2, -10.0, 10.0
    t_zero = C_WATER / g * math.log((t0 - t_air) / (0.0 - t_air))
    errors = [march_backward_euler(node, g, t_air, t0, dt, until_ice=0.01)[0] - t_zero for dt in (60.0, 30.0)]
    assert errors[0] > 0 and errors[1] > 0  # backward Euler cools too slowly
    assert 1.6 <= errors[0] / errors[1] <= 2.4
