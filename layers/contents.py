"""Stagnant contents filling a pipe bore: a lumped water node that can freeze.

The water is taken as well mixed (one temperature), the usual assumption of
the freeze-time estimates of ISO 12241:2008 sec. 6 and the ASHRAE Handbook of
Fundamentals (2017), ch. 23, "Time to freeze".  Freezing is tracked by the
enthalpy per metre of pipe, relative to liquid water at 0 degC:

    H = C_w T                 T > 0   (all liquid)
    H = -f L'                 T = 0   (ice fraction f from 0 to 1)
    H = -L' + C_i T           T < 0   (all ice)

with C_w = m' c_w, C_i = m' c_i and L' = m' h_sl, m' = rho_w pi r^2 the
water mass per metre.  The enthalpy is strictly increasing in T and its
inverse T(H) is continuous and piecewise linear, which lets a step solve for
H exactly (:meth:`WaterNode.solve`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

#: Density of water at 10 degC [kg m-3] (ISO 10456:2007 Table 3 lists 1000).
WATER_DENSITY = 1000.0
#: Specific heat of water at 10 degC [J kg-1 K-1] (ISO 10456:2007 Table 3).
WATER_SPECIFIC_HEAT = 4190.0
#: Specific heat of ice at 0 degC [J kg-1 K-1] (ISO 10456:2007 Table 3).
ICE_SPECIFIC_HEAT = 2000.0
#: Latent heat of fusion of ice at 0 degC [J kg-1]: 333.6 kJ/kg (CRC Handbook of
#: Chemistry and Physics, from memory; ISO 12241 uses 334 kJ/kg).
LATENT_HEAT_FUSION = 333.6e3
FREEZING_POINT = 0.0


@dataclass(frozen=True)
class WaterNode:
    """Water filling a bore of radius ``radius`` [m], per metre of pipe (per sphere for spheres)."""

    volume: float  # [m3 per reference unit]

    @classmethod
    def for_bore(cls, geometry: str, radius: float) -> "WaterNode":
        if geometry == "sphere":
            return cls(4.0 / 3.0 * math.pi * radius**3)
        return cls(math.pi * radius**2)

    @property
    def mass(self) -> float:
        """[kg per reference unit]"""
        return WATER_DENSITY * self.volume

    @property
    def c_water(self) -> float:
        """Heat capacity of the liquid [J K-1 per reference unit]."""
        return self.mass * WATER_SPECIFIC_HEAT

    @property
    def c_ice(self) -> float:
        return self.mass * ICE_SPECIFIC_HEAT

    @property
    def latent(self) -> float:
        """Latent heat of the whole contents [J per reference unit]."""
        return self.mass * LATENT_HEAT_FUSION

    def enthalpy(self, temperature: float, ice_fraction: float = 0.0) -> float:
        """Enthalpy relative to liquid water at 0 degC [J per reference unit]."""
        if temperature > 0.0:
            return self.c_water * temperature
        if temperature < 0.0:
            return -self.latent + self.c_ice * temperature
        return -ice_fraction * self.latent

    def state(self, enthalpy: np.ndarray | float) -> tuple[np.ndarray, np.ndarray]:
        """Temperature [degC] and ice fraction [-] for an enthalpy (vectorised)."""
        h = np.asarray(enthalpy, dtype=float)
        temp = np.where(h > 0.0, h / self.c_water, np.where(h < -self.latent, (h + self.latent) / self.c_ice, 0.0))
        ice = np.clip(-h / self.latent, 0.0, 1.0)
        return temp, ice

    def solve(self, slope: float, rhs: float) -> float:
        """Solve ``H + slope * T(H) = rhs`` for the enthalpy H (slope >= 0).

        ``T(H)`` is continuous and piecewise linear, so the left side is
        strictly increasing and the root is found exactly, segment by segment.
        """
        # liquid: H (1 + slope / Cw) = rhs, valid if H > 0
        h = rhs / (1.0 + slope / self.c_water)
        if h > 0.0:
            return h
        # mushy: T = 0, H = rhs, valid in [-L, 0]
        if rhs >= -self.latent:
            return rhs
        # ice: H + slope (H + L)/Ci = rhs
        return (rhs - slope * self.latent / self.c_ice) / (1.0 + slope / self.c_ice)
