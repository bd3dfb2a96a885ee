"""Argument checks of the public physics functions, written once.

Each returns its input as a float array and raises ``ValueError`` with the
argument's name; the physics modules (convection, radiation, psychrometrics)
call them at their entry, so that the kernels underneath run unchecked on
arrays that were checked once.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from layers.constants import ZERO_CELSIUS


def finite(name: str, value: ArrayLike) -> np.ndarray:
    """``value`` as a float array; NaN and infinity refused."""
    array = np.asarray(value, dtype=float)
    if np.any(np.isnan(array)):
        raise ValueError(f"{name} contains NaN")
    if np.any(np.isinf(array)):
        raise ValueError(f"{name} must be finite")
    return array


def positive(name: str, value: ArrayLike) -> np.ndarray:
    """Finite and > 0."""
    array = finite(name, value)
    if np.any(array <= 0.0):
        raise ValueError(f"{name} must be > 0, got {array.min():g}")
    return array


def non_negative(name: str, value: ArrayLike) -> np.ndarray:
    """Finite and >= 0."""
    array = finite(name, value)
    if np.any(array < 0.0):
        raise ValueError(f"{name} must be >= 0, got {array.min():g}")
    return array


def temperature(name: str, value: ArrayLike) -> np.ndarray:
    """A finite temperature above absolute zero [degC]."""
    array = finite(name, value)
    if np.any(array <= -ZERO_CELSIUS):
        raise ValueError(f"{name} must be above absolute zero (-273.15 degC)")
    return array


def within(name: str, value: ArrayLike, low: float, high: float, *, open_low: bool = False) -> np.ndarray:
    """Finite and within [low, high] (or (low, high] with ``open_low``)."""
    array = finite(name, value)
    below = array <= low if open_low else array < low
    if np.any(below | (array > high)):
        bracket = "(" if open_low else "["
        raise ValueError(f"{name} must be within {bracket}{low:g}, {high:g}], got {array.min():g} to {array.max():g}")
    return array


def choice(name: str, value: str, allowed: tuple[str, ...]) -> str:
    """One of ``allowed``."""
    if value not in allowed:
        raise ValueError(f"{name} must be one of {', '.join(allowed)}; got {value!r}")
    return value
