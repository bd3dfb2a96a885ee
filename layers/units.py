"""The one units registry, and quantity parsing at the edge.

Case files write quantities as strings with units (``"100 mm"``,
``"0.035 W/(m*K)"``, ``"20 degC"``) or as bare numbers in SI, except
temperatures, whose bare numbers are degrees Celsius.  Everything is parsed
here, once, into floats in SI (temperatures in degC); the core never sees a
unit string.
"""

from __future__ import annotations

import functools
import math
import os
import re
import shutil
import tempfile
from pathlib import Path
from typing import TYPE_CHECKING, Any

from layers.constants import ABSOLUTE_ZERO_CELSIUS, HIGHEST_PHYSICAL_TEMPERATURE
from layers.errors import CaseError

if TYPE_CHECKING:
    import pint

_POWER = re.compile(r"(?<=[A-Za-z\)])([23])(?![\d.])")


#: How the trade writes compound units without brackets, and what they mean.
_TRADE_UNITS = {"W/m2K": "W/(m2*K)", "W/mK": "W/(m*K)", "W/m2/K": "W/(m2*K)", "W/m/K": "W/(m*K)", "J/kgK": "J/(kg*K)"}


def _powers(text: str) -> str:
    """Read ``m2`` and ``m3`` as ``m**2`` and ``m**3``, and ``W/m2K`` as
    ``W/(m2*K)`` (the trade writes them so)."""
    text = text.replace("²", "2").replace("³", "3")
    for written, meant in _TRADE_UNITS.items():
        text = re.sub(rf"(?<![A-Za-z]){re.escape(written)}(?![A-Za-z0-9])", meant, text)
    return _POWER.sub(r"**\1", text)


_OFFSET_UNIT = re.compile(r"(?<![A-Za-z_])(degC|°C|celsius|degree_Celsius|degF|°F|fahrenheit|degree_Fahrenheit)(?![A-Za-z_])")


def _as_intervals(text: str) -> str:
    """Read degC and degF in a quantity that is not a temperature as intervals.

    ``"1 degC"`` as a temperature difference, or ``"0.035 W/(m*degC)"``, means
    a step of one degree, not the temperature 1 degC (274.15 K), which is what
    pint's offset-unit conversion would make of it.
    """
    return _OFFSET_UNIT.sub(lambda m: "delta_degF" if m.group(1).lower().endswith(("f", "fahrenheit")) else "delta_degC", text)


def _make_registry(cache_folder: Path | None) -> pint.UnitRegistry:
    """pint's full default registry with our preprocessing and ``pct``."""
    import pint

    units = pint.UnitRegistry(
        autoconvert_offset_to_baseunit=True, preprocessors=[_powers], cache_folder=cache_folder
    )
    units.define("percent_rh = 0.01 = pct")
    return units


def _units_cache_folder() -> Path:
    """The folder of pint's parsed-definitions cache: one per pint version,
    under the layers cache folder (``$LAYERS_CACHE_DIR``, else
    ``$XDG_CACHE_HOME/layers``, else ``~/.cache/layers``)."""
    import pint

    from layers.catalogue import cache_dir

    return cache_dir() / f"units-pint-{pint.__version__}"


def _discard(folder: Path) -> None:
    """Remove a damaged cache folder of ours (renamed aside first, so that a
    process reading it at the same moment never sees it half removed)."""
    try:
        aside = Path(tempfile.mkdtemp(dir=folder.parent, prefix=f".{folder.name}-old-"))
        os.replace(folder, aside / folder.name)
    except OSError:
        return
    shutil.rmtree(aside, ignore_errors=True)


@functools.cache
def registry() -> pint.UnitRegistry:
    """The one units registry, built on first use.

    Parsing pint's definitions file takes about 0.15 s, longer than the rest
    of ``layers check``; pint keeps the parsed definitions in a cache folder
    (:func:`_units_cache_folder`), which brings it to about 0.02 s.  The
    folder is filled under a temporary name and renamed into place, so a
    concurrent process never reads it half written.  A cache that cannot be
    created, read or written only makes the start slower, never an error:
    the registry is then built from the definitions, and a damaged cache is
    removed so that the next start rebuilds it.
    """
    try:
        folder = _units_cache_folder()
        if folder.is_dir():
            try:
                return _make_registry(folder)
            except Exception:  # noqa: BLE001 - any failure of a damaged cache: drop it, build without
                _discard(folder)
                return _make_registry(None)
        folder.parent.mkdir(parents=True, exist_ok=True)
        filling = Path(tempfile.mkdtemp(dir=folder.parent, prefix=f".{folder.name}-"))
    except Exception:  # noqa: BLE001 - no usable cache folder (unwritable, no home): build without one
        return _make_registry(None)
    try:
        built = _make_registry(filling)
        os.rename(filling, folder)  # fails if another process got there first: keep theirs
    except Exception:  # noqa: BLE001 - the cache could not be written: the registry (if built) is still good
        built = None
    finally:
        shutil.rmtree(filling, ignore_errors=True)
    return built if built is not None else _make_registry(None)


def __getattr__(name: str) -> Any:
    """``units.ureg``, the registry, built on first use (:func:`registry`)."""
    if name == "ureg":
        return registry()
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")

#: Kinds of quantity the case file uses: name -> (SI unit written for pint, unit shown to users).
KINDS: dict[str, tuple[str, str]] = {
    "length": ("m", "m"),
    "conductivity": ("W/(m*K)", "W/(m*K)"),
    "density": ("kg/m**3", "kg/m3"),
    "specific_heat": ("J/(kg*K)", "J/(kg*K)"),
    "areal_resistance": ("m**2*K/W", "m2*K/W"),
    "film_coefficient": ("W/(m**2*K)", "W/(m2*K)"),
    "heat_flux": ("W/m**2", "W/m2"),
    "linear_heat_flow": ("W/m", "W/m"),
    "speed": ("m/s", "m/s"),
    "duration": ("s", "s"),
    "temperature_difference": ("K", "K"),
    "fraction": ("dimensionless", "1"),
    "irradiance": ("W/m**2", "W/m2"),
    "latent_heat": ("J/kg", "J/kg"),
    "angle": ("degree", "deg"),
}


def _why(exc: Exception) -> str:
    """A pint parse failure in plain words."""
    import pint

    if isinstance(exc, pint.UndefinedUnitError):
        names = ", ".join(repr(n) for n in getattr(exc, "unit_names", ()) or ())
        return f"unknown unit {names}" if names else "unknown unit"
    return "not a number with a unit"


def _fail(file: str, key: str, reason: str) -> None:
    raise CaseError(file, key, reason)


#: Longest quantity text read (a number and a compound unit fit in far less).
MAX_TEXT = 80
_NUMBER = r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d{1,3})?"
_QUANTITY = re.compile(rf"^\s*({_NUMBER})\s*(.*?)\s*$", re.S)
#: A unit: names (letters, degree and micro signs, percent) joined by *, / and
#: spaces, with parentheses, m2 / m3 / m² style powers and one-digit exponents.
_UNIT = re.compile(r"^(?:[A-Za-z_°µ%Ω]+[23²³]?|[*/()\s]|(?:\*\*|\^)\s*-?[1-4])+$")


def _shown(text: str) -> str:
    """At most one line and about 80 characters of what the user wrote."""
    line = text.splitlines()[0] if text.splitlines() else ""
    line = line if len(line) <= MAX_TEXT else line[: MAX_TEXT - 3] + "..."
    return repr(line) + (" (and more lines)" if len(text.splitlines()) > 1 else "")


def checked_text(text: str, *, file: str, key: str, unit_only: bool = False) -> tuple[float, str]:
    """A quantity (or, with ``unit_only``, a unit) as text that is safe to hand
    to the units parser: a plain number, an optional exponent and a unit made
    of names, products, quotients and small powers.  Anything else (operators
    such as ``**`` between numbers, long text, control characters) is refused
    here, so that no expression is ever evaluated.

    Returns
    -------
    (float, str)
        The number (1 with ``unit_only``) [-] and the unit text ('' for none).
    """
    if len(text) > MAX_TEXT:
        _fail(file, key, f"{_shown(text)} is too long for a quantity ({len(text)} characters; a number and a unit fit in {MAX_TEXT})")
    number, unit = 1.0, text.strip()
    if not unit_only:
        m = _QUANTITY.match(text)
        if m is None:
            _fail(file, key, f"cannot read {_shown(text)} as a number and a unit")
        number, unit = float(m.group(1)), m.group(2)
    if unit and unit != "1" and not _UNIT.match(unit):
        _fail(file, key, f"cannot read {_shown(unit)} as a unit: write names such as 'mm', 'W/(m*K)' or 'degC', with powers like m2 or m**2")
    return number, unit


def parse_quantity(value: Any, kind: str, *, file: str = "<case>", key: str = "?") -> float:
    """Parse a number or a string with units into SI.

    Parameters
    ----------
    value : str or float
        ``"100 mm"`` or a bare number already in SI.
    kind : str
        A key of :data:`KINDS`, e.g. ``"length"``.
    file, key : str
        Where the value came from, for the error message.

    Returns
    -------
    float
        The value in the SI unit of ``kind``.
    """
    import pint

    unit, shown = KINDS[kind]
    if isinstance(value, bool):
        _fail(file, key, f"expected a quantity in {shown}, got {value!r}")
    if isinstance(value, (int, float)):
        number = float(value)
    elif isinstance(value, str) and (known := _READ.get((value, kind))) is not None:
        number = known
    elif isinstance(value, str):
        magnitude, unit_text = checked_text(value, file=file, key=key)
        if not unit_text:
            number = magnitude  # a bare number written as a string: SI
        else:
            try:
                q = registry().Quantity(magnitude, _as_intervals(unit_text))
            except Exception as exc:  # pint raises several unrelated types
                _fail(file, key, f"cannot read {value!r} as a quantity ({_why(exc)}); write a number and a unit like {shown}")
            if not isinstance(q, pint.Quantity) or (q.dimensionless and kind != "fraction" and str(q.units) == "dimensionless"):
                _fail(file, key, f"{value!r} has no unit; write it in {shown}")
            try:
                number = float(q.to(unit).magnitude)
            except pint.DimensionalityError:
                noun = kind.replace("_", " ")
                article = "an" if noun[0] in "aeiou" else "a"
                _fail(file, key, f"{value!r} is not {article} {noun} (expected a unit like {shown})")
        _remember(value, kind, number)
    else:
        _fail(file, key, f"expected a quantity in {shown}, got {type(value).__name__} {value!r}")
    if not math.isfinite(number):
        _fail(file, key, f"{value!r} is not a finite number")
    return number


#: Quantities already read, by their text and kind (a sweep reads the same texts
#: once per point; pint's parse is the costly part of reading a case).  Read with
#: ``get`` only: another thread may clear it between a test and a lookup.
_READ: dict[tuple[str, str], float] = {}


def _remember(text: str, kind: str, number: float) -> None:
    if len(_READ) > 50_000:
        _READ.clear()
    _READ[(text, kind)] = number


def parse_temperature(value: Any, *, file: str = "<case>", key: str = "?") -> float:
    """Parse a temperature into degC.

    Bare numbers are degrees Celsius; strings may carry ``degC``, ``degF`` or ``K``.

    Returns
    -------
    float
        Temperature [degC].
    """
    import pint

    if isinstance(value, bool):
        _fail(file, key, f"expected a temperature, got {value!r}")
    if isinstance(value, (int, float)):
        number = float(value)
    elif isinstance(value, str) and (known := _READ.get((value, "temperature"))) is not None:
        number = known
    elif isinstance(value, str):
        magnitude, unit_text = checked_text(value, file=file, key=key)
        try:
            q = registry().Quantity(magnitude, unit_text) if unit_text else magnitude
        except Exception as exc:
            _fail(file, key, f"cannot read {value!r} as a temperature ({_why(exc)}); write e.g. '20 degC', '68 degF' or '293.15 K'")
        if not isinstance(q, pint.Quantity) or q.dimensionless:
            magnitude = q.magnitude if isinstance(q, pint.Quantity) else q
            number = float(magnitude)
        else:
            try:
                number = float(q.to("degC").magnitude)
            except pint.DimensionalityError:
                _fail(file, key, f"{value!r} is not a temperature (use degC, degF or K)")
        if math.isfinite(number):
            _remember(value, "temperature", number)
    else:
        _fail(file, key, f"expected a temperature, got {type(value).__name__} {value!r}")
    if not math.isfinite(number):
        _fail(file, key, f"{value!r} is not a finite temperature")
    if number <= ABSOLUTE_ZERO_CELSIUS:
        _fail(file, key, f"{value!r} is at or below absolute zero")
    if number >= HIGHEST_PHYSICAL_TEMPERATURE:
        _fail(file, key, f"{value!r} is beyond what any construction material survives ({HIGHEST_PHYSICAL_TEMPERATURE:g} degC)")
    return number


def parse_period(value: Any, *, file: str = "<case>", key: str = "period") -> float:
    """Parse the period of a cycle: a duration that must be positive.

    Parameters
    ----------
    value : str or float
        ``"24 h"``, ``"1 d"``, or a bare number of seconds [s].
    file, key : str
        Where the value came from, for the error message [-].

    Returns
    -------
    float
        The period [s].
    """
    period = parse_quantity(value, "duration", file=file, key=key)
    if period <= 0:
        _fail(file, key, f"must be positive, got {value!r}")
    return period


def unit_factor(unit: str, kind: str, *, file: str, key: str) -> tuple[float, float]:
    """Scale and offset that convert numbers in ``unit`` to SI: ``si = a * v + b``.

    Used for series columns, which are converted once as whole arrays.
    ``kind`` may be ``"temperature"`` (result in degC) or a key of :data:`KINDS`.
    """
    import pint

    checked_text(unit, file=file, key=key, unit_only=True)
    ureg = registry()
    try:
        if kind == "temperature":
            q0 = ureg.Quantity(0.0, unit).to(ureg.degC).magnitude
            q1 = ureg.Quantity(1.0, unit).to(ureg.degC).magnitude
        else:
            target = KINDS[kind][0]
            unit = _as_intervals(unit)
            q0 = ureg.Quantity(0.0, unit).to(target).magnitude
            q1 = ureg.Quantity(1.0, unit).to(target).magnitude
    except (pint.DimensionalityError, pint.UndefinedUnitError, AttributeError, ValueError) as exc:
        _fail(file, key, f"unit {unit!r} does not fit a {kind.replace('_', ' ')} ({exc})")
    return float(q1 - q0), float(q0)
