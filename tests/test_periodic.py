"""Verification of layers.iso13786 (ISO 13786 dynamic thermal characteristics).

Oracles: algebraic identities of the transfer matrix, its limits (long period,
thin layer, no heat capacity), a direct numerical integration of the periodic
heat equation (independent of the closed-form matrix), ISO 6946 U-values, and
walls A, B, C whose values were computed with the ISO 13786 formulas.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from layers.iso13786 import (
    PeriodicElement,
    dynamic_characteristics,
    layer_matrix,
    penetration_depth,
    resistance_matrix,
    wall_matrix,
)

DAY = 86400.0
R_SI, R_SE = 0.13, 0.04  # ISO 6946 horizontal heat flow [m2 K W-1]
L = PeriodicElement.layer
CONCRETE = (2.0, 2400.0, 1000.0)  # ISO 10456 concrete 2400 kg m-3: lambda, rho, c
WALLS = {
    "A": [L(0.20, *CONCRETE, "concrete")],
    "B": [L(0.015, 0.40, 1000, 1000, "gypsum plaster"), L(0.20, *CONCRETE, "concrete"),
          L(0.10, 0.035, 20, 1450, "EPS"), L(0.010, 0.8, 1600, 1000, "render")],
    "C": [L(0.0125, 0.25, 900, 1000, "plasterboard"), L(0.16, 0.035, 30, 1030, "mineral wool"),
          L(0.015, 0.13, 650, 1700, "OSB")],
}


def _ode_transfer(state: np.ndarray, d, lam, rho, c, period) -> np.ndarray:
    """Carry [theta, q] columns across a layer by integrating the periodic heat equation.

    dtheta/dx = -q/lambda (Fourier) and dq/dx = -i omega rho c theta (energy balance
    for theta ~ exp(i omega t)), integrated with DOP853 at rtol 1e-11.
    """
    omega = 2.0 * math.pi / period

    def rhs(x, y):
        return [-y[1] / lam, -1j * omega * rho * c * y[0]]

    columns = []
    for y0 in state.T:
        sol = solve_ivp(rhs, (0.0, d), y0.astype(complex), method="DOP853", rtol=1e-11, atol=1e-14)
        assert sol.success
        columns.append(sol.y[:, -1])
    return np.array(columns).T


def _ode_wall(elements, r_si, r_se, period) -> np.ndarray:
    """Wall matrix from the ODE, inside first; a film is the jump theta2 = theta1 - R q."""
    state = np.eye(2, dtype=complex)
    state[0] -= r_si * state[1]
    for e in elements:
        state = _ode_transfer(
            state, e.thickness, e.conductivity, e.density, e.specific_heat, period
        )
    state[0] -= r_se * state[1]
    return state


@pytest.mark.parametrize("layer", [(0.20, *CONCRETE), (0.10, 0.035, 20, 1450), (0.5, *CONCRETE)])
@pytest.mark.parametrize("period", [DAY, 3600.0])
def test_layer_matrix_matches_direct_integration(layer, period):
    # Independent of the closed form: solve_ivp (DOP853) at rtol 1e-11, up to xi ~ 16;
    # the global error observed is ~1e-11 relative, so 1e-8 leaves room for the
    # integrator yet catches any wrong formula (sign, factor 2, delta vs 1/delta).
    d, lam, rho, c = layer
    expected = _ode_transfer(np.eye(2, dtype=complex), d, lam, rho, c, period)
    np.testing.assert_allclose(layer_matrix(d, lam, rho, c, period), expected, rtol=1e-8)


@pytest.mark.parametrize("name", WALLS)
def test_wall_admittances_match_direct_integration(name):
    # Whole wall by integration, inside first: checks the product order and the
    # side convention (Y11 inside) as well as the layers; tolerance as above.
    z = _ode_wall(WALLS[name], R_SI, R_SE, DAY)
    dc = dynamic_characteristics(WALLS[name], R_SI, R_SE, DAY)
    np.testing.assert_allclose(dc.periodic_transmittance, -1 / z[0, 1], rtol=1e-8)
    np.testing.assert_allclose(dc.internal_admittance, -z[0, 0] / z[0, 1], rtol=1e-8)
    np.testing.assert_allclose(dc.external_admittance, -z[1, 1] / z[0, 1], rtol=1e-8)


def _printed(text: str) -> tuple[float, float]:
    """A printed value and half a unit in its last printed digit."""
    decimals = len(text.split(".")[1]) if "." in text else 0
    return float(text), 0.5 * 10.0 ** -decimals


@pytest.mark.parametrize(
    "name, u, y12, f, shift, kappa1_kj, kappa2_kj",
    [("A", "3.7037", "1.9531", "0.5273", "-5.475", "86.42", "175.88"),
     ("B", "0.31475", "0.04401", "0.1398", "-8.214", "69.74", "17.97"),
     ("C", "0.2038", "0.19687", "0.9660", "-2.090", "13.44", "18.83")],
)
def test_walls_against_computed_iso13786_values(name, u, y12, f, shift, kappa1_kj, kappa2_kj):
    # COMPUTED values (ISO 13786:2017 §6 formulas, cross-checked by a finite-volume
    # run), not a published worked example. Tolerance: half a unit in the last
    # printed digit of each value, i.e. the rounding of the table.
    dc = dynamic_characteristics(WALLS[name], R_SI, R_SE, DAY)
    checks = [(dc.thermal_transmittance, u), (abs(dc.periodic_transmittance), y12),
              (dc.decrement_factor, f), (dc.time_shift, shift),
              (dc.areal_heat_capacity_inside / 1e3, kappa1_kj),
              (dc.areal_heat_capacity_outside / 1e3, kappa2_kj)]
    for actual, text in checks:
        value, tolerance = _printed(text)
        assert actual == pytest.approx(value, abs=tolerance), text
    assert dc.time_lag == -dc.time_shift


def test_u_value_iso6946_worked_example():
    # Chudley & Greeno, Building Construction Handbook: 215 mm brick (0.84) + 13 mm
    # plaster (0.50), Rso 0.055, Rsi 0.123, printed U = 2.17 W m-2 K-1 (2 decimals).
    wall = [L(0.013, 0.50, 1300, 1000), L(0.215, 0.84, 1700, 800)]
    dc = dynamic_characteristics(wall, r_si=0.123, r_se=0.055)
    assert dc.thermal_transmittance == pytest.approx(2.17, abs=0.005)
    # ISO 6946: U = 1 / (Rsi + sum d/lambda + Rse); the same sum, to round-off.
    r_total = 0.123 + 0.013 / 0.5 + 0.215 / 0.84 + 0.055
    assert dc.thermal_transmittance == pytest.approx(1 / r_total, rel=1e-14)


@pytest.mark.parametrize("layer", [(0.20, *CONCRETE), (0.10, 0.035, 20, 1450), (1.0, *CONCRETE)])
def test_det_single_layer_is_one(layer):
    # ISO 13786:2017 sec. 6 layer matrix (formulas from memory): with k d = (1 + i) xi it is
    # [[cosh kd, -sinh kd/(lam k)], [-lam k sinh kd, cosh kd]], so det Z = Z11 Z22 - Z12 Z21
    # = cosh^2 kd - sinh^2 kd = 1 exactly (an identity of the standard's formulas, derived
    # here, not a clause of the standard).  Round-off grows with |Z11|^2.
    z = layer_matrix(*layer, DAY)
    assert abs(np.linalg.det(z) - 1) < 1e-14 * max(1.0, abs(z[0, 0]) ** 2)


@pytest.mark.parametrize("name", WALLS)
def test_det_wall_is_one(name):
    # ISO 13786:2017 sec. 6 (from memory): the wall matrix is the product
    # Z_se Z_N ... Z_1 Z_si; each layer matrix has det 1 (above) and each surface-resistance
    # matrix [[1, -R], [0, 1]] has det 1, so det Z = 1 (derived, as above).  Round-off
    # scales with the terms.
    z = wall_matrix(WALLS[name], R_SI, R_SE, DAY)
    scale = max(abs(z[0, 0] * z[1, 1]), abs(z[0, 1] * z[1, 0]), 1.0)
    assert abs(np.linalg.det(z) - 1) < 1e-13 * scale


def test_penetration_depth_matches_carslaw_jaeger():
    # delta = sqrt(2 alpha / omega) (Carslaw & Jaeger §2.6, from memory); concrete
    # alpha = 8.33e-7 m2 s-1, 24 h: 0.1514 m (COMPUTED), half a unit of the 4th decimal.
    delta = penetration_depth(*CONCRETE, DAY)
    assert delta == pytest.approx(0.1514, abs=5e-5)
    alpha = CONCRETE[0] / (CONCRETE[1] * CONCRETE[2])
    omega = 2 * math.pi / DAY
    assert delta == pytest.approx(math.sqrt(2 * alpha / omega), rel=1e-14)


@pytest.mark.parametrize("name", WALLS)
def test_long_period_tends_to_steady_state(name):
    # ISO 13786:2017 sec. 6 (from memory): as T -> infinity, xi = d/delta -> 0 and each layer
    # matrix tends to [[1, -d/lam], [0, 1]], so Z12 -> -(Rsi + sum d/lam + Rse) = -1/U with U
    # the ISO 6946:2017 sec. 6.7.1 transmittance, and Y12 = -1/Z12 -> U, f = |Y12|/U -> 1
    # (a limit of the standard's formulas, derived here).  The first correction is a phase of order
    # omega R C ~ 1e-6 rad at T = 1e12 s, so |Y12| is within 1e-9 of U (second
    # order) and the phase under 1e-5 rad.  (The time shift in hours tends to a
    # constant, the wall's mean delay, not to zero: only the phase vanishes.)
    dc = dynamic_characteristics(WALLS[name], R_SI, R_SE, period=1e12)
    assert abs(dc.periodic_transmittance) == pytest.approx(dc.thermal_transmittance, rel=1e-9)
    assert dc.decrement_factor == pytest.approx(1.0, rel=1e-9)
    assert abs(np.angle(dc.periodic_transmittance)) < 1e-5


def test_thin_layer_is_pure_resistance():
    # ISO 13786:2017 sec. 6 (from memory): for xi = d/delta -> 0 the layer matrix tends to the
    # matrix of a pure resistance R = d/lam, [[1, -R], [0, 1]], the form the standard gives
    # surface resistances and air layers (a limit of its formulas, derived here).
    # xi = d / delta ~ 7e-4: equal up to terms of order xi^2 ~ 4e-7.
    d = 1e-4
    z = layer_matrix(d, *CONCRETE, DAY)
    np.testing.assert_allclose(z[0, 1], -d / CONCRETE[0], rtol=1e-6)
    np.testing.assert_allclose(z[0, 0], 1.0, atol=1e-6)
    assert abs(z[1, 0]) * d / CONCRETE[0] < 1e-6


def test_purely_resistive_wall():
    # ISO 13786:2017 sec. 6 (from memory): resistance-only elements have matrices
    # [[1, -R], [0, 1]], whose product is [[1, -R_T], [0, 1]]; hence Y12 = -1/Z12 = 1/R_T = U
    # and Y11 = -Z11/Z12 = 1/R_T (real: time shifts 0), kappa = (T/2pi)|(Z11 - 1)/Z12| = 0
    # (derived here).
    wall = [PeriodicElement.resistive(0.18, "air layer"), PeriodicElement.resistive(0.5)]
    dc = dynamic_characteristics(wall, R_SI, R_SE, DAY)
    assert dc.time_shift == 0.0
    assert dc.admittance_time_shift_inside == 0.0
    assert dc.areal_heat_capacity_inside == 0.0
    assert abs(dc.periodic_transmittance) == pytest.approx(1 / (R_SI + 0.68 + R_SE), rel=1e-14)
    np.testing.assert_allclose(resistance_matrix(0.18), [[1, -0.18], [0, 1]])


def test_time_shift_does_not_wrap_beyond_half_a_period():
    # Delays grow steadily with concrete thickness (about d/delta * T/2pi); past
    # 12 h the shift must continue below -12 h, not jump to a lead.
    shifts = [dynamic_characteristics([L(d, *CONCRETE)], R_SI, R_SE).time_shift
              for d in np.linspace(0.05, 0.9, 35)]
    assert all(-24.0 < s <= 0.0 for s in shifts)
    assert np.all(np.diff(shifts) < 0) and shifts[-1] < -12.0


def test_to_dataset_units_and_names():
    ds = dynamic_characteristics(WALLS["B"], R_SI, R_SE).to_dataset("wall B")
    assert ds.attrs["Conventions"] == "CF-1.10" and ds.attrs["period_h"] == 24.0
    expected = {"thermal_transmittance": "W m-2 K-1", "periodic_transmittance": "W m-2 K-1",
                "decrement_factor": "1", "time_shift": "h", "internal_admittance": "W m-2 K-1",
                "external_admittance": "W m-2 K-1", "internal_admittance_time_shift": "h",
                "external_admittance_time_shift": "h",
                "areal_heat_capacity_inside": "J m-2 K-1",
                "areal_heat_capacity_outside": "J m-2 K-1"}
    for name, units in expected.items():
        assert ds[name].attrs["units"] == units and ds[name].attrs["long_name"]
        assert ds[name].ndim == 0 and np.isfinite(ds[name].item())


@pytest.mark.parametrize(
    "make",
    [lambda: L(-0.1, *CONCRETE), lambda: L(0.1, 0.0, 2400, 1000),
     lambda: L(0.1, 2.0, float("nan"), 1000),
     lambda: L(0.1, 2.0, 2400, -1), lambda: PeriodicElement.resistive(-0.1),
     lambda: PeriodicElement(0.1, 2.0, 2400, 1000, resistance=0.1), lambda: PeriodicElement(0.1),
     lambda: layer_matrix(0.1, *CONCRETE, 0.0), lambda: penetration_depth(*CONCRETE, -DAY),
     lambda: dynamic_characteristics(WALLS["A"], -0.13, R_SE),
     lambda: dynamic_characteristics(WALLS["A"], R_SI, R_SE, period=float("inf")),
     lambda: dynamic_characteristics([], 0.0, 0.0)],
)
def test_bad_inputs_raise(make):
    with pytest.raises(ValueError):
        make()
