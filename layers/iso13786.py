"""Dynamic thermal characteristics of a layered component (ISO 13786).

The layer transfer-matrix method of ISO 13786:2017 §6: each layer, air layer
and surface film is a 2x2 complex matrix linking the temperature and heat-flow
density amplitudes on its two sides, ``[theta2, q2] = Z [theta1, q1]``, with
``q`` positive from side 1 toward side 2.  Side 1 is the inside.  The wall
matrix is ``Z = Zse . ZN ... Z1 . Zsi``, from which the admittances, the
periodic thermal transmittance, the decrement factor, the time shifts and the
areal heat capacities follow (ISO 13786:2017 §6).

References
----------
ISO 13786:2017, Thermal performance of building components -- Dynamic thermal
characteristics -- Calculation methods.
ISO 6946:2017, Building components and building elements -- Thermal
resistance and thermal transmittance -- Calculation methods.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import xarray as xr

from layers.about import CAUTION


def _positive(name: str, value: float) -> float:
    """Return ``value`` as a float, or raise if it is not finite and > 0."""
    number = float(value)
    if not (math.isfinite(number) and number > 0.0):
        raise ValueError(f"{name} must be a positive finite number, got {value!r}")
    return number


def _non_negative(name: str, value: float) -> float:
    """Return ``value`` as a float, or raise if it is not finite and >= 0."""
    number = float(value)
    if not (math.isfinite(number) and number >= 0.0):
        raise ValueError(f"{name} must be a non-negative finite number, got {value!r}")
    return number


@dataclass(frozen=True)
class PeriodicElement:
    """One element of a component: a homogeneous layer or a pure resistance.

    A layer gives ``thickness`` [m], ``conductivity`` [W m-1 K-1], ``density``
    [kg m-3] and ``specific_heat`` [J kg-1 K-1].  A resistance-only element
    (air layer, contact resistance; its heat capacity neglected, as ISO 13786
    treats air layers) gives ``resistance`` [m2 K W-1] and no material
    properties; its ``thickness`` is then informative only.
    """

    thickness: float = 0.0
    conductivity: float | None = None
    density: float | None = None
    specific_heat: float | None = None
    resistance: float | None = None
    name: str = ""

    def __post_init__(self) -> None:
        label = f"element {self.name!r}" if self.name else "element"
        material = (self.conductivity, self.density, self.specific_heat)
        if self.resistance is not None:
            if any(value is not None for value in material):
                raise ValueError(
                    f"{label}: give either a resistance or material properties, not both"
                )
            _non_negative(f"{label}: resistance", self.resistance)
            _non_negative(f"{label}: thickness", self.thickness)
            return
        if any(value is None for value in material):
            raise ValueError(
                f"{label}: needs a resistance, or conductivity, density and specific heat"
            )
        _positive(f"{label}: thickness", self.thickness)
        for quantity, value in zip(("conductivity", "density", "specific heat"), material):
            _positive(f"{label}: {quantity}", value)

    @classmethod
    def layer(cls, thickness: float, conductivity: float, density: float,
              specific_heat: float, name: str = "") -> PeriodicElement:
        """A homogeneous layer; units as in the class docstring."""
        return cls(thickness, conductivity, density, specific_heat, None, name)

    @classmethod
    def resistive(cls, resistance: float, name: str = "") -> PeriodicElement:
        """A resistance-only element of ``resistance`` [m2 K W-1]."""
        return cls(resistance=resistance, name=name)

    @property
    def thermal_resistance(self) -> float:
        """Steady-state thermal resistance, d/lambda or R [m2 K W-1]."""
        if self.resistance is not None:
            return float(self.resistance)
        return float(self.thickness) / float(self.conductivity)

    def matrix(self, period: float) -> np.ndarray:
        """Transfer matrix of this element at ``period`` [s]."""
        if self.resistance is not None:
            return resistance_matrix(self.resistance)
        return layer_matrix(self.thickness, self.conductivity, self.density,
                            self.specific_heat, period)


def penetration_depth(conductivity: float, density: float, specific_heat: float,
                      period: float) -> float:
    """Periodic penetration depth delta = sqrt(lambda T / (pi rho c)) [m] (ISO 13786 §6).

    Parameters
    ----------
    conductivity : float
        Thermal conductivity [W m-1 K-1].
    density : float
        Density [kg m-3].
    specific_heat : float
        Specific heat capacity [J kg-1 K-1].
    period : float
        Period of the variation [s].
    """
    lam = _positive("conductivity", conductivity)
    rho_c = _positive("density", density) * _positive("specific heat", specific_heat)
    return math.sqrt(lam * _positive("period", period) / (math.pi * rho_c))


def layer_matrix(thickness: float, conductivity: float, density: float,
                 specific_heat: float, period: float) -> np.ndarray:
    """Transfer matrix (2, 2) complex of a homogeneous layer (ISO 13786 §6).

    Parameters as :func:`penetration_depth`, plus ``thickness`` [m].  With
    xi = d/delta, Z11 = Z22 = cosh xi cos xi + i sinh xi sin xi, and Z12 [m2 K W-1]
    and Z21 [W m-2 K-1] as written below; this equals cosh(kd), -sinh(kd)/(lambda k),
    -lambda k sinh(kd) with k = (1 + i)/delta.
    """
    d = _positive("thickness", thickness)
    lam = _positive("conductivity", conductivity)
    delta = penetration_depth(lam, density, specific_heat, period)
    xi = d / delta
    ch, sh, co, si = math.cosh(xi), math.sinh(xi), math.cos(xi), math.sin(xi)
    z11 = complex(ch * co, sh * si)
    z12 = -delta / (2.0 * lam) * complex(sh * co + ch * si, ch * si - sh * co)
    z21 = -lam / delta * complex(sh * co - ch * si, sh * co + ch * si)
    return np.array([[z11, z12], [z21, z11]], dtype=complex)


def resistance_matrix(resistance: float) -> np.ndarray:
    """Transfer matrix [[1, -R], [0, 1]] of a surface film or air layer (ISO 13786 §6).

    ``resistance`` [m2 K W-1].
    """
    r = _non_negative("resistance", resistance)
    return np.array([[1.0, -r], [0.0, 1.0]], dtype=complex)


def wall_matrix(elements: Sequence[PeriodicElement], r_si: float, r_se: float,
                period: float) -> np.ndarray:
    """Component matrix Z = Zse . ZN ... Z1 . Zsi (ISO 13786 §6).

    ``elements`` run from the inside (side 1) to the outside; ``r_si`` and
    ``r_se`` are the surface resistances [m2 K W-1]; ``period`` [s].
    """
    _positive("period", period)
    _non_negative("r_si", r_si)
    _non_negative("r_se", r_se)
    z = resistance_matrix(r_si)
    for element in elements:
        z = element.matrix(period) @ z
    return resistance_matrix(r_se) @ z


def _time_shift_h(value: complex, period: float) -> float:
    """(T / 2 pi) arg(value), arg in (-pi, pi], in hours (ISO 13786 §6)."""
    return period / (2.0 * math.pi) * float(np.angle(value)) / 3600.0


@dataclass(frozen=True)
class DynamicCharacteristics:
    """ISO 13786 dynamic thermal characteristics of a component at one period.

    Admittances and transmittances in [W m-2 K-1], time shifts in [h] (negative
    for a delay, as the standard writes them), areal heat capacities in
    [J m-2 K-1], ``period`` in [s]; ``matrix`` is the component matrix Z.
    """

    period: float
    thermal_transmittance: float
    periodic_transmittance: complex
    internal_admittance: complex
    external_admittance: complex
    decrement_factor: float
    time_shift: float
    admittance_time_shift_inside: float
    admittance_time_shift_outside: float
    areal_heat_capacity_inside: float
    areal_heat_capacity_outside: float
    matrix: np.ndarray

    @property
    def time_lag(self) -> float:
        """Delay of the transmitted heat flow behind the outside temperature [h]."""
        return -self.time_shift

    def to_dataset(self, title: str = "") -> xr.Dataset:
        """Scalar variables with CF ``units`` and ``long_name``."""
        rows = {
            "thermal_transmittance": (self.thermal_transmittance, "W m-2 K-1",
                                      "thermal transmittance U (ISO 6946)"),
            "periodic_transmittance": (abs(self.periodic_transmittance), "W m-2 K-1",
                                       "modulus of the periodic thermal transmittance |Y12|"),
            "time_shift": (self.time_shift, "h", "time shift of Y12 (negative = delay)"),
            "decrement_factor": (self.decrement_factor, "1", "decrement factor |Y12|/U"),
            "internal_admittance": (abs(self.internal_admittance), "W m-2 K-1",
                                    "modulus of the internal thermal admittance |Y11|"),
            "internal_admittance_time_shift": (self.admittance_time_shift_inside, "h",
                                               "time shift of Y11"),
            "external_admittance": (abs(self.external_admittance), "W m-2 K-1",
                                    "modulus of the external thermal admittance |Y22|"),
            "external_admittance_time_shift": (self.admittance_time_shift_outside, "h",
                                               "time shift of Y22"),
            "areal_heat_capacity_inside": (self.areal_heat_capacity_inside, "J m-2 K-1",
                                           "internal areal heat capacity kappa1"),
            "areal_heat_capacity_outside": (self.areal_heat_capacity_outside, "J m-2 K-1",
                                            "external areal heat capacity kappa2"),
        }
        data = {name: ((), float(value), {"units": units, "long_name": long_name})
                for name, (value, units, long_name) in rows.items()}
        attrs = {"Conventions": "CF-1.10", "title": title, "period_h": self.period / 3600.0,
                 "source": "ISO 13786:2017 layer transfer-matrix method", "caution": CAUTION}
        return xr.Dataset(data, attrs=attrs)


def dynamic_characteristics(elements: Sequence[PeriodicElement], r_si: float, r_se: float,
                            period: float = 86400.0) -> DynamicCharacteristics:
    """Dynamic thermal characteristics of a component (ISO 13786 §6).

    Parameters
    ----------
    elements : sequence of PeriodicElement
        Layers and air layers from the inside (side 1) to the outside.
    r_si, r_se : float
        Inside and outside surface resistances [m2 K W-1] (ISO 6946).
    period : float
        Period of the variation [s]; 86 400 s for the daily cycle.

    Notes
    -----
    Y11 = -Z11/Z12, Y22 = -Z22/Z12, Y12 = -1/Z12, f = |Y12|/U,
    kappa1 = (T/2pi)|(Z11 - 1)/Z12|, kappa2 = (T/2pi)|(Z22 - 1)/Z12|, and U =
    1/(Rsi + sum R + Rse) (ISO 6946).  The time shift of Y12 is taken in (-T, 0]
    so that a delay beyond T/2 does not wrap to a lead; a delay beyond a whole
    period cannot be told from its remainder by phase alone.
    """
    elements = list(elements)
    period = _positive("period", period)
    z = wall_matrix(elements, r_si, r_se, period)
    z11, z12, z22 = z[0, 0], z[0, 1], z[1, 1]
    total = float(r_si) + float(r_se) + sum(e.thermal_resistance for e in elements)
    if total <= 0.0:
        raise ValueError("the component has no thermal resistance: U would be infinite")
    u = 1.0 / total
    y12 = -1.0 / z12
    shift = _time_shift_h(y12, period)
    if shift > 0.0:
        shift -= period / 3600.0
    scale = period / (2.0 * math.pi)
    return DynamicCharacteristics(
        period=period, thermal_transmittance=u, periodic_transmittance=complex(y12),
        internal_admittance=complex(-z11 / z12), external_admittance=complex(-z22 / z12),
        decrement_factor=abs(y12) / u, time_shift=shift,
        admittance_time_shift_inside=_time_shift_h(-z11 / z12, period),
        admittance_time_shift_outside=_time_shift_h(-z22 / z12, period),
        areal_heat_capacity_inside=scale * abs((z11 - 1.0) / z12),
        areal_heat_capacity_outside=scale * abs((z22 - 1.0) / z12),
        matrix=z,
    )
