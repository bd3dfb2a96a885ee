"""Material library and temperature-dependent conductivity models.

A :class:`Material` holds the density, specific heat and thermal conductivity of
one layer material, and its conductivity law: None for a constant, a
:class:`ConductivityTable` of values against temperature (interpolated
linearly, held constant beyond the ends), or a :class:`ConductivityPolynomial`
``a + b*θ + c*θ**2 + ...`` in the temperature θ [degC].  Each law evaluates
itself (``at``), its Kirchhoff transform (``integral``) and its integral mean
(``mean``); the material's methods hand over to it.

The packaged library ``layers/data/materials.toml`` is read once by
:func:`load_library`; a case file may add materials or override library ones
under ``[materials.NAME]`` (see :func:`material_from_table`), and
:func:`resolve` finds a name in both.

Temperature-dependent conductivity enters a steady calculation through the
integral mean over a layer's temperature range,

    λm = 1/(θ2 − θ1) ∫[θ1, θ2] λ(θ) dθ,

the mean-conductivity rule of ISO 12241 and ASTM C680, which for a linear
λ = a + bθ reduces to a + b(θ1 + θ2)/2.  :meth:`Material.mean_conductivity`
evaluates it exactly for tables and polynomials, and
:meth:`Material.conductivity_integral` gives the Kirchhoff transform
∫[0, θ] λ dθ on which it rests.

References
----------
.. [1] ISO 10456:2007, Building materials and products - Hygrothermal
   properties - Tabulated design values and procedures for determining declared
   and design thermal values (Table 3; the same values as EN 12524:2000).
.. [2] ISO 12241:2008, Thermal insulation for building equipment and industrial
   installations - Calculation rules (mean thermal conductivity of a layer).
.. [3] ASTM C680, Standard Practice for Estimate of the Heat Gain or Loss and the
   Surface Temperatures of Insulated Flat, Cylindrical, and Spherical Systems by
   Use of Computer Programs (temperature-dependent conductivity).
"""

from __future__ import annotations

import difflib
import functools
import math
import re
import tomllib
from dataclasses import dataclass
from importlib import resources
from typing import Any, Mapping

import numpy as np

from layers.errors import CaseError
from layers.units import parse_quantity, parse_temperature

#: Categories a material may belong to.
CATEGORIES: tuple[str, ...] = (
    "masonry",
    "concrete",
    "board",
    "timber",
    "insulation",
    "metal",
    "plaster",
    "fluid",
    "other",
)

#: Temperature at which :attr:`Material.conductivity` is given for k(T) materials [degC]
#: (the reference mean temperature of declared values in ISO 10456).
REFERENCE_TEMPERATURE = 10.0

#: Lowest temperature at which a polynomial conductivity is checked to be positive [degC].
POLYNOMIAL_CHECK_LOW = -50.0
#: Highest such temperature when the material gives no ``max_temperature`` [degC].
POLYNOMIAL_CHECK_HIGH = 1000.0

#: Where the packaged library lives, as shown in error messages.
LIBRARY_FILE = "layers/data/materials.toml"

_KEYS = (
    "base",
    "description",
    "category",
    "conductivity",
    "density",
    "specific_heat",
    "max_temperature",
    "source",
    "vapour_resistance_factor",
    "vapour_resistance_factor_wet_cup",
)
#: Keys of a membrane entry of the library (``kind = "membrane"``).
_MEMBRANE_KEYS = ("kind", "description", "category", "equivalent_air_thickness", "source")
#: The smallest water vapour resistance factor a material may have: still air has 1 [-].
MIN_VAPOUR_RESISTANCE_FACTOR = 1.0
_NAME = re.compile(r"^[a-z0-9]+(-[a-z0-9]+)*$")


# ---------------------------------------------------------------------- vapour


def vapour_resistance_factor_problem(value: Any) -> str:
    """What is wrong with a water vapour resistance factor mu [-] as written, or ''.

    mu is a plain number (no unit), finite and at least 1: still air has
    mu = 1 by definition (ISO 10456, ISO 13788), and no material resists
    vapour less than still air.  A vapour-tight material (metal, glass) is
    written as a large number (the library uses 1e6).
    """
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return f"must be a plain number (mu, no unit), got {value!r}"
    if not math.isfinite(float(value)):
        return f"must be a finite number (write a vapour-tight layer as a large number, e.g. 1e6), got {value!r}"
    if float(value) < MIN_VAPOUR_RESISTANCE_FACTOR:
        return f"must be at least 1 (still air has mu = 1), got {value!r}"
    return ""


@dataclass(frozen=True)
class Membrane:
    """A sheet that adds vapour resistance and nothing else (a vapour control
    layer, a breather membrane, a felt): no thermal resistance, no heat capacity.

    Parameters
    ----------
    name : str
        Library name, e.g. ``"polyethylene-vcl"``.
    equivalent_air_thickness : float
        Water vapour diffusion-equivalent air layer thickness s_d [m].
    description, source : str
        What it is, and where the value comes from.
    """

    name: str
    equivalent_air_thickness: float
    description: str = ""
    source: str = ""
    category: str = "membrane"

    def __post_init__(self) -> None:
        value = float(self.equivalent_air_thickness)
        if not (math.isfinite(value) and value > 0.0):
            raise ValueError(f"membrane {self.name!r}: equivalent_air_thickness must be positive and finite, got {value!r}")
        object.__setattr__(self, "equivalent_air_thickness", value)


# ---------------------------------------------------------------------- k(T) laws


def _table_problem(temperature: np.ndarray, value: np.ndarray) -> str:
    """What is wrong with a conductivity table, or an empty string."""
    if temperature.shape != value.shape:
        return f"{temperature.size} temperatures but {value.size} values"
    if temperature.size < 2:
        return "needs at least two points"
    if not (np.all(np.isfinite(temperature)) and np.all(np.isfinite(value))):
        return "holds a value that is not a finite number"
    if np.any(np.diff(temperature) <= 0.0):
        return "temperatures must be strictly increasing"
    if np.any(value <= 0.0):
        return "conductivities must be positive"
    return ""


def _read_only(values: Any) -> np.ndarray:
    array = np.array(values, dtype=float)
    array.setflags(write=False)
    return array


@dataclass(frozen=True)
class ConductivityTable:
    """Conductivity tabulated against temperature.

    Interpolated linearly between the points and held at the first and last
    values beyond the ends (no extrapolation of the trend), so the law is
    linear on each piece between neighbouring points and on the two
    half-lines beyond them; every integral below is exact for it.

    Parameters
    ----------
    temperature : sequence of float
        Table abscissa [degC], strictly increasing, two points or more.
    value : sequence of float
        Conductivity at each ``temperature`` [W m-1 K-1], all positive.

    Raises
    ------
    ValueError
        For a table that is not as described.
    """

    temperature: tuple[float, ...]
    value: tuple[float, ...]

    def __post_init__(self) -> None:
        temperature = np.asarray(self.temperature, dtype=float).ravel()
        value = np.asarray(self.value, dtype=float).ravel()
        problem = _table_problem(temperature, value)
        if problem:
            raise ValueError(f"conductivity table: {problem}")
        object.__setattr__(self, "temperature", tuple(temperature.tolist()))
        object.__setattr__(self, "value", tuple(value.tolist()))

    @functools.cached_property
    def points(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Read-only arrays: temperatures [degC], values [W m-1 K-1] and the
        integral from the first point to each point [W m-1] (trapezoids)."""
        x, k = _read_only(self.temperature), _read_only(self.value)
        cumulative = _read_only(np.concatenate(([0.0], np.cumsum(np.diff(x) * 0.5 * (k[1:] + k[:-1])))))
        return x, k, cumulative

    def at(self, temperature: np.ndarray) -> np.ndarray:
        """Conductivity at ``temperature`` [degC] -> [W m-1 K-1]."""
        x, k, _ = self.points
        return np.interp(temperature, x, k)

    def integral(self, temperature: np.ndarray) -> np.ndarray:
        """∫[0 degC, θ] λ dθ for θ = ``temperature`` [degC] -> [W m-1]."""
        return self._from_first_point(temperature) - self._from_first_point(np.asarray(0.0))

    def _from_first_point(self, t: np.ndarray) -> np.ndarray:
        """∫[first table point, θ] λ dθ [W m-1], negative below the first point."""
        x, k, cumulative = self.points
        inside = np.clip(t, x[0], x[-1])
        piece = np.clip(np.searchsorted(x, inside, side="right") - 1, 0, len(x) - 2)
        within = cumulative[piece] + (inside - x[piece]) * 0.5 * (k[piece] + self.at(inside))
        return within + k[0] * np.minimum(t - x[0], 0.0) + k[-1] * np.maximum(t - x[-1], 0.0)

    def mean(self, low: np.ndarray, high: np.ndarray) -> np.ndarray:
        """Integral mean between ``low <= high`` [degC] -> [W m-1 K-1].

        Both ends in one linear piece: the value at the midpoint (exact, and
        the local value when ``low == high``).  Otherwise the partial pieces at
        each end, each integrated from its own table point, plus the whole
        pieces between, so that no large antiderivatives are subtracted.
        """
        x, k, cumulative = self.points
        piece_low = np.searchsorted(x, low, side="right")  # 0 below the table, len(x) above it
        piece_high = np.searchsorted(x, high, side="right")
        node_above_low = np.minimum(piece_low, len(x) - 1)  # first point above ``low`` (where pieces differ)
        node_below_high = np.maximum(piece_high - 1, 0)  # last point below ``high``
        first = (x[node_above_low] - low) * 0.5 * (self.at(low) + k[node_above_low])
        whole = cumulative[node_below_high] - cumulative[node_above_low]
        last = (high - x[node_below_high]) * 0.5 * (k[node_below_high] + self.at(high))
        with np.errstate(divide="ignore", invalid="ignore"):
            spanning = (first + whole + last) / (high - low)
        return np.where(piece_low == piece_high, self.at(0.5 * (low + high)), spanning)


@dataclass(frozen=True)
class ConductivityPolynomial:
    """Conductivity ``a + b*θ + c*θ**2 + ...`` with θ in degC.

    Parameters
    ----------
    coefficients : sequence of float
        ``(a, b, c, ...)`` [W m-1 K-1], [W m-1 K-2], [W m-1 K-3], ...; finite,
        at least one.  Positivity is the caller's check, over the range the
        material is meant for (:func:`material_from_table`).
    """

    coefficients: tuple[float, ...]

    def __post_init__(self) -> None:
        coefficients = tuple(float(c) for c in self.coefficients)
        if not coefficients or not all(math.isfinite(c) for c in coefficients):
            raise ValueError("polynomial coefficients must be finite numbers")
        object.__setattr__(self, "coefficients", coefficients)

    def at(self, temperature: np.ndarray) -> np.ndarray:
        """Conductivity at ``temperature`` [degC] -> [W m-1 K-1]."""
        return np.asarray(np.polynomial.polynomial.polyval(temperature, self.coefficients), dtype=float)

    def integral(self, temperature: np.ndarray) -> np.ndarray:
        """∫[0 degC, θ] λ dθ for θ = ``temperature`` [degC] -> [W m-1], term by term."""
        antiderivative = (0.0,) + tuple(c / (n + 1) for n, c in enumerate(self.coefficients))
        return np.asarray(np.polynomial.polynomial.polyval(temperature, antiderivative), dtype=float)

    def mean(self, low: np.ndarray, high: np.ndarray) -> np.ndarray:
        """Integral mean between ``low`` and ``high`` [degC] -> [W m-1 K-1].

        The closed form Σ cₙ (θ1ⁿ + θ1ⁿ⁻¹θ2 + … + θ2ⁿ)/(n + 1), free of the
        cancellation in (K(θ2) − K(θ1))/(θ2 − θ1); a + b(θ1 + θ2)/2 for a
        linear λ.
        """
        out = np.zeros(np.broadcast(low, high).shape)
        for n, c in enumerate(self.coefficients):
            out = out + c * sum(low**i * high ** (n - i) for i in range(n + 1)) / (n + 1)
        return out


# ---------------------------------------------------------------------- the material


@dataclass(frozen=True)
class Material:
    """One layer material: its properties and its conductivity law.

    Parameters
    ----------
    name : str
        Library or case-file name, e.g. ``"mineral-wool"``.
    conductivity : float
        Thermal conductivity [W m-1 K-1]; for a temperature-dependent material,
        its value at :data:`REFERENCE_TEMPERATURE` (10 degC, the ISO 10456
        reference), which must agree with ``law``.
    density : float
        Density [kg m-3].
    specific_heat : float
        Specific heat capacity [J kg-1 K-1].
    law : ConductivityTable or ConductivityPolynomial or None
        How the conductivity depends on temperature; None for a constant.
    description, category, source : str
        What it is, one of :data:`CATEGORIES` (or empty), and where the values
        come from.
    max_temperature : float or None
        Upper service temperature [degC], where known.
    vapour_resistance_factor : float or None
        Water vapour resistance factor mu [-], the design value the ISO 13788
        condensation method uses by default (ISO 10456 dry-cup value where the
        standard gives two); None where the library has no value (a material
        without one is refused by ``layers condensation`` only).
    vapour_resistance_factor_wet_cup : float or None
        The ISO 10456 wet-cup value [-] where it differs; None: the same as
        ``vapour_resistance_factor``.

    Notes
    -----
    Instances are immutable and hashable; two materials are equal when all
    their fields are.
    """

    name: str
    conductivity: float
    density: float
    specific_heat: float
    law: ConductivityTable | ConductivityPolynomial | None = None
    description: str = ""
    category: str = ""
    source: str = ""
    max_temperature: float | None = None
    vapour_resistance_factor: float | None = None
    vapour_resistance_factor_wet_cup: float | None = None

    def __post_init__(self) -> None:
        for label in ("conductivity", "density", "specific_heat"):
            value = float(getattr(self, label))
            if not (math.isfinite(value) and value > 0.0):
                raise ValueError(f"material {self.name!r}: {label} must be positive and finite, got {value!r}")
            object.__setattr__(self, label, value)
        for label in ("vapour_resistance_factor", "vapour_resistance_factor_wet_cup"):
            value = getattr(self, label)
            if value is None:
                continue
            problem = vapour_resistance_factor_problem(value)
            if problem:
                raise ValueError(f"material {self.name!r}: {label} {problem}")
            object.__setattr__(self, label, float(value))
        if self.vapour_resistance_factor_wet_cup is not None and self.vapour_resistance_factor is None:
            raise ValueError(f"material {self.name!r}: a wet-cup vapour_resistance_factor needs the (dry-cup) vapour_resistance_factor too")
        if self.max_temperature is not None:
            object.__setattr__(self, "max_temperature", float(self.max_temperature))
        if self.law is not None:
            reference = float(self.law.at(REFERENCE_TEMPERATURE))
            if not math.isclose(self.conductivity, reference, rel_tol=1e-9):
                raise ValueError(
                    f"material {self.name!r}: conductivity {self.conductivity} does not equal the "
                    f"table or polynomial value {reference} at {REFERENCE_TEMPERATURE:g} degC"
                )

    @classmethod
    def with_law(
        cls,
        name: str,
        law: ConductivityTable | ConductivityPolynomial,
        density: float,
        specific_heat: float,
        **attributes: Any,
    ) -> Material:
        """A temperature-dependent material whose nominal conductivity is ``law`` at 10 degC.

        Parameters
        ----------
        name : str
            Material name.
        law : ConductivityTable or ConductivityPolynomial
            The conductivity law.
        density : float
            [kg m-3]
        specific_heat : float
            [J kg-1 K-1]
        **attributes
            ``description``, ``category``, ``source``, ``max_temperature`` [degC].
        """
        reference = float(law.at(REFERENCE_TEMPERATURE))
        return cls(name, reference, density, specific_heat, law, **attributes)

    @classmethod
    def from_table(
        cls, name: str, temperature: Any, conductivity: Any, density: float, specific_heat: float, **attributes: Any
    ) -> Material:
        """A material with ``conductivity`` [W m-1 K-1] tabulated at ``temperature`` [degC].

        See :class:`ConductivityTable` and :meth:`with_law` (``density``
        [kg m-3], ``specific_heat`` [J kg-1 K-1]).
        """
        try:
            law = ConductivityTable(temperature, conductivity)
        except ValueError as exc:
            raise ValueError(f"material {name!r}: {exc}") from None
        return cls.with_law(name, law, density, specific_heat, **attributes)

    @classmethod
    def from_polynomial(
        cls, name: str, coefficients: Any, density: float, specific_heat: float, **attributes: Any
    ) -> Material:
        """A material with conductivity ``a + b*θ + ...`` [W m-1 K-1], θ in degC.

        See :class:`ConductivityPolynomial` and :meth:`with_law` (``density``
        [kg m-3], ``specific_heat`` [J kg-1 K-1]).
        """
        return cls.with_law(name, ConductivityPolynomial(coefficients), density, specific_heat, **attributes)

    def vapour_factor(self, cup: str = "dry-cup") -> float | None:
        """The water vapour resistance factor mu [-] for ``cup`` (``"dry-cup"``
        or ``"wet-cup"``; the wet-cup value falls back on the dry-cup one where
        the library gives only one), or None where the material has none."""
        if cup == "wet-cup" and self.vapour_resistance_factor_wet_cup is not None:
            return self.vapour_resistance_factor_wet_cup
        return self.vapour_resistance_factor

    @property
    def is_constant(self) -> bool:
        """True when the conductivity does not depend on temperature."""
        return self.law is None

    @property
    def diffusivity(self) -> float:
        """Thermal diffusivity λ/(ρc) at the nominal conductivity [m2 s-1]."""
        return self.conductivity / (self.density * self.specific_heat)

    @property
    def conductivity_temperature(self) -> np.ndarray | None:
        """Abscissa of a conductivity table [degC] (read-only), else None."""
        return self.law.points[0] if isinstance(self.law, ConductivityTable) else None

    @property
    def conductivity_table(self) -> np.ndarray | None:
        """Values of a conductivity table [W m-1 K-1] (read-only), else None."""
        return self.law.points[1] if isinstance(self.law, ConductivityTable) else None

    @property
    def conductivity_polynomial(self) -> tuple[float, ...] | None:
        """Coefficients of a polynomial conductivity ([W m-1 K-1], [W m-1 K-2], ...), else None."""
        return self.law.coefficients if isinstance(self.law, ConductivityPolynomial) else None

    def conductivity_at(self, temperature: Any) -> np.ndarray:
        """Thermal conductivity at a temperature.

        Parameters
        ----------
        temperature : array_like
            Temperature [degC].

        Returns
        -------
        numpy.ndarray
            Conductivity [W m-1 K-1], the shape of ``temperature``.  A
            polynomial is evaluated wherever asked; it was checked positive
            only between -50 degC and ``max_temperature`` (or 1000 degC) when
            read from a file.
        """
        t = np.asarray(temperature, dtype=float)
        return np.full(t.shape, self.conductivity) if self.law is None else self.law.at(t)

    def conductivity_integral(self, temperature: Any) -> np.ndarray:
        """Kirchhoff transform of the conductivity, ∫[0 degC, θ] λ dθ.

        Parameters
        ----------
        temperature : array_like
            Upper limit θ [degC].

        Returns
        -------
        numpy.ndarray
            [W m-1], the shape of ``temperature``; negative below 0 degC.
            Exact for every law.
        """
        t = np.asarray(temperature, dtype=float)
        return self.conductivity * t if self.law is None else self.law.integral(t)

    def mean_conductivity(self, t1: Any, t2: Any) -> np.ndarray:
        """Integral-mean conductivity between two temperatures.

        λm = 1/(θ2 − θ1) ∫[θ1, θ2] λ dθ, the mean thermal conductivity of a
        layer whose faces are at θ1 and θ2 (ISO 12241, ASTM C680 [3]_).

        Parameters
        ----------
        t1, t2 : array_like
            Face temperatures [degC]; broadcast together; either order.

        Returns
        -------
        numpy.ndarray
            [W m-1 K-1]; exact, and equal to :meth:`conductivity_at` where
            ``t1 == t2``.
        """
        a, b = np.broadcast_arrays(np.asarray(t1, dtype=float), np.asarray(t2, dtype=float))
        if self.law is None:
            return np.full(a.shape, self.conductivity)
        return self.law.mean(np.minimum(a, b), np.maximum(a, b))


# ---------------------------------------------------------------------- reading TOML


def _parse_conductivity(value: Any, *, file: str, key: str) -> dict[str, Any]:
    """Read a ``conductivity`` entry into Material keyword arguments (``law``, and
    ``conductivity`` [W m-1 K-1] for a constant)."""
    if isinstance(value, (str, int, float)) and not isinstance(value, bool):
        conductivity = parse_quantity(value, "conductivity", file=file, key=key)
        if conductivity <= 0.0:
            raise CaseError(file, key, f"conductivity must be positive, got {value!r}")
        return {"conductivity": conductivity, "law": None}
    if not isinstance(value, dict):
        raise CaseError(
            file,
            key,
            f"expected a conductivity like \"0.035 W/(m*K)\", a table {{temperature = [...], value = [...]}} "
            f"or {{polynomial = [a, b, c], reference = \"degC\"}}, got {value!r}",
        )
    if "polynomial" in value:
        unknown = sorted(set(value) - {"polynomial", "reference"})
        if unknown:
            raise CaseError(
                file, f"{key}.{unknown[0]}", "unknown key in a polynomial conductivity (expected polynomial, reference)"
            )
        reference = value.get("reference", "degC")
        if not isinstance(reference, str) or reference.strip().replace("°C", "degC") not in ("degC", "celsius"):
            raise CaseError(file, f"{key}.reference", f"only reference = \"degC\" is supported, got {reference!r}")
        coefficients = value["polynomial"]
        if (
            not isinstance(coefficients, list)
            or not coefficients
            or not all(isinstance(c, (int, float)) and not isinstance(c, bool) for c in coefficients)
        ):
            raise CaseError(
                file,
                f"{key}.polynomial",
                f"expected a list of numbers [a, b, c] (W/(m*K), W/(m*K2), W/(m*K3)), got {coefficients!r}",
            )
        if not all(math.isfinite(c) for c in coefficients):
            raise CaseError(file, f"{key}.polynomial", "coefficients must be finite numbers")
        return {"law": ConductivityPolynomial(coefficients)}
    unknown = sorted(set(value) - {"temperature", "value"})
    if unknown:
        raise CaseError(
            file,
            f"{key}.{unknown[0]}",
            "unknown key in a conductivity table (expected temperature and value, or polynomial and reference)",
        )
    for part in ("temperature", "value"):
        if part not in value:
            raise CaseError(file, f"{key}.{part}", "missing: a conductivity table needs both temperature and value")
        if not isinstance(value[part], list):
            raise CaseError(file, f"{key}.{part}", f"expected a list, got {value[part]!r}")
    temperature = np.array(
        [parse_temperature(v, file=file, key=f"{key}.temperature[{i}]") for i, v in enumerate(value["temperature"])]
    )
    table = np.array(
        [parse_quantity(v, "conductivity", file=file, key=f"{key}.value[{i}]") for i, v in enumerate(value["value"])]
    )
    if temperature.size != table.size:
        raise CaseError(file, key, f"{temperature.size} temperatures but {table.size} values")
    if temperature.size < 2:
        raise CaseError(file, f"{key}.temperature", "a conductivity table needs at least two points")
    if np.any(np.diff(temperature) <= 0.0):
        raise CaseError(file, f"{key}.temperature", "temperatures must be strictly increasing (sorted, no repeats)")
    if np.any(table <= 0.0):
        raise CaseError(file, f"{key}.value", "conductivities must be positive")
    return {"law": ConductivityTable(temperature, table)}


def _positive(value: Any, kind: str, *, file: str, key: str) -> float:
    number = parse_quantity(value, kind, file=file, key=key)
    if number <= 0.0:
        raise CaseError(file, key, f"{kind.replace('_', ' ')} must be positive, got {value!r}")
    return number


def material_from_table(
    name: str,
    table: Mapping[str, Any],
    *,
    file: str,
    key: str,
    library: Mapping[str, Material] | bool | None = None,
) -> Material:
    """Build a material from one TOML table.

    Used for the packaged library and for a case file's ``[materials.NAME]``.

    Parameters
    ----------
    name : str
        The material's name (the table's key).
    table : mapping
        Keys ``conductivity``, ``density``, ``specific_heat`` (required unless
        ``base`` is given), ``description``, ``category``, ``max_temperature``,
        ``source`` and ``base``.  Quantities are strings with units or bare SI
        numbers (temperatures: degC); ``conductivity`` may also be a table
        ``{temperature = [...], value = [...]}`` or a polynomial
        ``{polynomial = [a, b, c], reference = "degC"}``.
    file : str
        The file the table came from, for error messages.
    key : str
        The table's dotted key (``materials.site-foam``), for error messages.
    library : mapping of str to Material, bool or None, optional
        Where ``base`` is looked up: a mapping (e.g. the library merged with the
        case's materials read so far), or None or True for the packaged
        library; False forbids ``base``.  With ``base = "NAME"`` the material
        starts from that one and the keys given replace its values (a new
        ``conductivity`` replaces its whole conductivity model).

    Returns
    -------
    Material

    Raises
    ------
    CaseError
        On an unknown key, a missing or non-positive conductivity, density or
        specific heat, a wrong unit, an unsorted or non-positive table, a
        polynomial that is not positive from -50 degC up to ``max_temperature``
        (1000 degC when none is given), an unknown category or base.
    """
    if not isinstance(table, Mapping):
        raise CaseError(file, key, f"expected a table of material properties, got {table!r}")
    for k in table:
        if k not in _KEYS:
            close = difflib.get_close_matches(k, _KEYS, n=1)
            hint = f"; did you mean {close[0]!r}?" if close else f"; expected one of {', '.join(_KEYS)}"
            raise CaseError(file, f"{key}.{k}", f"unknown key {k!r}{hint}")

    fields: dict[str, Any] = {}
    base: Material | None = None
    if "base" in table:
        base_name = table["base"]
        if not isinstance(base_name, str):
            raise CaseError(file, f"{key}.base", f"expected the name of a library material, got {base_name!r}")
        if library is False:
            raise CaseError(file, f"{key}.base", "a base material cannot be used here")
        candidates = load_library() if library is None or library is True else library
        if base_name not in candidates:
            raise CaseError(file, f"{key}.base", _unknown_message(base_name, candidates))
        base = candidates[base_name]
        fields = {
            "conductivity": base.conductivity,
            "law": base.law,
            "density": base.density,
            "specific_heat": base.specific_heat,
            "description": base.description,
            "category": base.category,
            "source": base.source,
            "max_temperature": base.max_temperature,
            "vapour_resistance_factor": base.vapour_resistance_factor,
            "vapour_resistance_factor_wet_cup": base.vapour_resistance_factor_wet_cup,
        }
    else:
        for required in ("conductivity", "density", "specific_heat"):
            if required not in table:
                raise CaseError(
                    file, f"{key}.{required}", "missing (or give base = \"NAME\" to start from a library material)"
                )

    if "conductivity" in table:
        fields.update(_parse_conductivity(table["conductivity"], file=file, key=f"{key}.conductivity"))
    for kind in ("density", "specific_heat"):
        if kind in table:
            fields[kind] = _positive(table[kind], kind, file=file, key=f"{key}.{kind}")
    if "max_temperature" in table:
        fields["max_temperature"] = parse_temperature(table["max_temperature"], file=file, key=f"{key}.max_temperature")
    for label in ("vapour_resistance_factor", "vapour_resistance_factor_wet_cup"):
        if label in table:
            problem = vapour_resistance_factor_problem(table[label])
            if problem:
                raise CaseError(file, f"{key}.{label}", problem)
            fields[label] = float(table[label])
    if base is not None and "vapour_resistance_factor" in table and "vapour_resistance_factor_wet_cup" not in table:
        fields["vapour_resistance_factor_wet_cup"] = None  # one value given: it stands for both
    if "vapour_resistance_factor_wet_cup" in table and fields.get("vapour_resistance_factor") is None:
        raise CaseError(file, f"{key}.vapour_resistance_factor_wet_cup",
                        "needs vapour_resistance_factor (the dry-cup value) as well")
    for text in ("description", "category", "source"):
        if text in table:
            if not isinstance(table[text], str):
                raise CaseError(file, f"{key}.{text}", f"expected a string, got {table[text]!r}")
            fields[text] = table[text]
    fields.setdefault("description", "")
    fields.setdefault("category", "")
    fields.setdefault("source", "")
    fields.setdefault("max_temperature", None)
    fields.setdefault("vapour_resistance_factor", None)
    fields.setdefault("vapour_resistance_factor_wet_cup", None)
    if fields["category"] and fields["category"] not in CATEGORIES:
        raise CaseError(
            file,
            f"{key}.category",
            f"unknown category {fields['category']!r}; expected one of {', '.join(CATEGORIES)}",
        )

    if base is not None:
        changed = [k for k in table if k not in ("base", "description", "source")]
        note = f"{base.name} with {', '.join(changed)} changed" if changed else f"as {base.name}"
        if "description" not in table:
            fields["description"] = f"{base.description} ({note})"
        if "source" not in table:
            fields["source"] = f"{base.source}; {', '.join(changed)} set in {file}" if changed else base.source

    law = fields["law"]
    if isinstance(law, ConductivityPolynomial):
        high = fields["max_temperature"] if fields["max_temperature"] is not None else POLYNOMIAL_CHECK_HIGH
        high = max(high, REFERENCE_TEMPERATURE)
        probe = np.linspace(min(POLYNOMIAL_CHECK_LOW, high), high, 2001)
        values = law.at(probe)
        if np.any(values <= 0.0):
            where = float(probe[np.argmin(values)])
            raise CaseError(
                file,
                f"{key}.conductivity",
                f"the polynomial is not positive at {where:.0f} degC (checked from {POLYNOMIAL_CHECK_LOW:.0f} degC "
                f"to {high:.0f} degC; set max_temperature to the range it is meant for)",
            )
    if law is not None:
        fields["conductivity"] = float(law.at(REFERENCE_TEMPERATURE))
    try:
        return Material(name=name, **fields)
    except ValueError as exc:  # a check the parsing above should already have made
        raise CaseError(file, key, str(exc)) from exc


# ---------------------------------------------------------------------- the library


@functools.lru_cache(maxsize=1)
def _library_files() -> tuple[dict[str, Material], dict[str, Membrane]]:
    text = resources.files("layers").joinpath("data").joinpath("materials.toml").read_text(encoding="utf-8")
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise CaseError(LIBRARY_FILE, "?", f"not valid TOML ({exc})") from exc
    materials: dict[str, Material] = {}
    membranes: dict[str, Membrane] = {}
    for name, table in data.items():
        if not _NAME.match(name):
            raise CaseError(LIBRARY_FILE, name, "library names are lower-case words joined by hyphens")
        for required in ("source", "category", "description"):
            if not isinstance(table, dict) or not table.get(required):
                raise CaseError(LIBRARY_FILE, f"{name}.{required}", "every library material needs one")
        if "base" in table:
            raise CaseError(LIBRARY_FILE, f"{name}.base", "library materials give their own values")
        if table.get("kind") == "membrane":
            membranes[name] = _membrane_from_table(name, table)
            continue
        materials[name] = material_from_table(name, table, file=LIBRARY_FILE, key=name)
    return materials, membranes


def _membrane_from_table(name: str, table: Mapping[str, Any]) -> Membrane:
    for k in table:
        if k not in _MEMBRANE_KEYS:
            raise CaseError(LIBRARY_FILE, f"{name}.{k}", f"a membrane entry takes {', '.join(_MEMBRANE_KEYS)} only")
    if table.get("category") != "membrane":
        raise CaseError(LIBRARY_FILE, f"{name}.category", "a membrane entry has category = \"membrane\"")
    sd = parse_quantity(table.get("equivalent_air_thickness"), "length", file=LIBRARY_FILE, key=f"{name}.equivalent_air_thickness")
    return Membrane(name, sd, description=table["description"], source=table["source"])


def _library() -> dict[str, Material]:
    return _library_files()[0]


def load_membranes() -> dict[str, Membrane]:
    """The membranes of the packaged library (entries with ``kind = "membrane"``).

    Returns
    -------
    dict of str to Membrane
        A new dict on each call.
    """
    return dict(_library_files()[1])


def resolve_membrane(name: Any, *, file: str, key: str) -> Membrane:
    """Find a membrane of the library by name (case-insensitive).

    Raises
    ------
    CaseError
        For an unknown name (a solid material named here gets a hint).
    """
    membranes = _library_files()[1]
    if isinstance(name, str) and name.strip().lower() in membranes:
        return membranes[name.strip().lower()]
    if isinstance(name, str) and name.strip().lower() in _library():
        raise CaseError(file, key, f"{name!r} is a solid material, not a membrane; a membrane layer names one of "
                                   f"{', '.join(sorted(membranes))} or gives equivalent_air_thickness")
    raise CaseError(file, key, f"unknown membrane {name!r}; the library has {', '.join(sorted(membranes))}")


def load_library() -> dict[str, Material]:
    """The packaged material library, ``layers/data/materials.toml``.

    Returns
    -------
    dict of str to Material
        A new dict on each call (the materials themselves are immutable and
        shared); the file is read once per process.
    """
    return dict(_library())


def _suggestions(name: str, candidates: Any, n: int = 5) -> list[str]:
    """Up to ``n`` names like ``name``: those containing it (or contained in it) first, then difflib matches."""
    names = sorted(candidates)
    word = name.strip().lower()
    containing = [c for c in names if word and (word in c or c in word)]
    close = [c for c in difflib.get_close_matches(word, names, n=n, cutoff=0.5) if c not in containing]
    return (containing + close)[:n]


def _unknown_message(name: str, candidates: Any) -> str:
    close = _suggestions(name, candidates)
    hint = f"; did you mean {', '.join(close)}?" if close else ""
    return f"unknown material {name!r}{hint} (`layers materials WORD` searches the library)"


def resolve(
    name: str,
    overrides: Mapping[str, Material] | None = None,
    *,
    file: str,
    key: str,
) -> Material:
    """Find a material by name.

    Parameters
    ----------
    name : str
        Material name.  A case file's materials are matched exactly; library
        names (all lower case) also match regardless of case (``"EPS"``).
    overrides : mapping of str to Material, optional
        The case file's ``[materials]``; they take precedence over the library.
    file, key : str
        Where the name was written, for the error message.

    Returns
    -------
    Material

    Raises
    ------
    CaseError
        For an unknown name, listing up to five close names.
    """
    overrides = overrides or {}
    if not isinstance(name, str):
        raise CaseError(file, key, f"expected a material name, got {name!r}")
    if name in overrides:
        return overrides[name]
    library = _library()
    if name in library:
        return library[name]
    if name.strip().lower() in library and name.strip().lower() not in overrides:
        return library[name.strip().lower()]
    if name.strip().lower() in _library_files()[1]:
        raise CaseError(file, key, f"{name!r} is a membrane (vapour resistance only): give it its own layer with "
                                   f"kind = \"membrane\" and material = {name.strip().lower()!r}")
    raise CaseError(file, key, _unknown_message(name, set(library) | set(overrides)))


def search(word: str | None = None) -> list[Material]:
    """Library materials whose name, description or category contains a word.

    Parameters
    ----------
    word : str or None
        Case-insensitive; hyphens, underscores and spaces are treated alike
        (``"mineral wool"`` finds ``mineral-wool``).  None or empty: all.

    Returns
    -------
    list of Material
        Sorted by name.
    """
    materials = sorted(_library().values(), key=lambda m: m.name)
    if not word or not word.strip():
        return materials

    def normal(text: str) -> str:
        return re.sub(r"[-_\s]+", " ", text.lower())

    needle = normal(word.strip())
    return [m for m in materials if any(needle in normal(text) for text in (m.name, m.description, m.category))]
