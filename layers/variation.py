"""The ``[[sweep]]`` and ``[uncertainty]`` tables: which case keys vary, and how.

Both name case keys by a dotted path into the case file (``layers.2.thickness``,
``materials.site-foam.conductivity``, ``outside.film_coefficient``; list items
1-based).  A variant is the case file with those keys replaced, read again by
the one case reader, so a swept or sampled value is checked exactly as if the
user had written it (:func:`with_values`).  This module only reads and checks
the tables; :mod:`layers.sweeps` and :mod:`layers.uncertainty` run the variants.
"""

from __future__ import annotations

import copy
import math
import re
from dataclasses import dataclass
from typing import Any

import numpy as np

from layers.errors import CaseError
from layers.units import checked_text, registry

#: The most points a sweep (the product of its dimensions) may have.
MAX_POINTS = 100_000
#: The most samples an uncertainty table may draw.
MAX_SAMPLES = 100_000
#: Dimension names a sweep may not take (the result's own dimensions).
RESERVED = ("time", "x", "cell", "nv", "interface", "layer", "material", "thickness", "quantile", "sample", "point", "radius",
            "scheme", "x_bounds", "layer_interface")
#: Beginnings of the names of result variables: a sweep dimension may not take them.
RESERVED_STEMS = ("surface_temperature", "heat_", "interface_", "stored_", "temperature", "air_temperature", "sol_air",
                  "film_coefficient", "dew_point", "contents_", "ice_", "energy_", "steady_", "time_", "freeze_",
                  "nonlinear_", "probability_", "passes_", "margin_", "summary_")

_NAME = re.compile(r"[A-Za-z][A-Za-z0-9_]{0,63}\Z")


@dataclass(frozen=True)
class SweepDim:
    """One ``[[sweep]]`` table.

    Attributes
    ----------
    name : str
        The dimension's name in the result.
    key : str
        The dotted case key it sets.
    values : tuple
        The case-file value of each point (as the user would write it).
    coordinate : numpy.ndarray
        The values as numbers in ``units`` (float), or as text (object).
    units : str
        The unit the coordinate is in (as written in the case file; "" for text
        or for bare numbers, which are SI).
    """

    name: str
    key: str
    values: tuple
    coordinate: np.ndarray
    units: str


@dataclass(frozen=True)
class Varied:
    """One entry of ``[uncertainty.vary]``: normal (``mean`` the case's value and
    ``sd`` in ``units``) or uniform (``low`` .. ``high`` in ``units``)."""

    key: str
    distribution: str          # "normal" | "uniform"
    units: str
    mean: float = math.nan
    sd: float = math.nan
    low: float = math.nan
    high: float = math.nan


@dataclass(frozen=True)
class UncertaintySpec:
    """The ``[uncertainty]`` table."""

    samples: int
    seed: int
    confidence: float
    vary: tuple[Varied, ...]


def _path(key: str) -> list[str]:
    return key.split(".")


def said(key: Any) -> str:
    """A key as a message may quote it: escaped, at most about 60 characters."""
    text = repr(key)
    return text if len(text) <= 60 else text[:57] + "...'"


def _lookup(data: dict, key: str, file: str, where: str) -> tuple[Any, str | int, Any]:
    """The container holding ``key``'s last part, that part, and its value (None if absent).

    A list item is written 1-based (``layers.2.thickness``).  The last part
    may be absent from a table (an optional key); everything before it must exist.
    """
    if not isinstance(key, str) or not key or any(not part for part in _path(key)) or not key.isprintable() or len(key) > 200:
        raise CaseError(file, where, f"must be a dotted case key like \"layers.2.thickness\", got {said(key)}")
    node: Any = data
    parts = _path(key)
    for depth, part in enumerate(parts):
        last = depth == len(parts) - 1
        if isinstance(node, list):
            if not (part.isascii() and part.isdigit()) or part != str(int(part)) or not 1 <= int(part) <= len(node):
                raise CaseError(file, where, f"{said(key)}: {'.'.join(parts[:depth]) or 'the case'} is a list of {len(node)}; "
                                             f"give an item number 1..{len(node)} written plainly, not {said(part)}")
            index: str | int = int(part) - 1
            if last:
                return node, index, node[index]
            node = node[index]
        elif isinstance(node, dict):
            if last:
                return node, part, node.get(part)
            if part not in node:
                raise CaseError(file, where, f"{said(key)}: the case has no {said('.'.join(parts[:depth + 1]))}")
            node = node[part]
        else:
            raise CaseError(file, where, f"{said(key)}: {said('.'.join(parts[:depth]))} is a value, not a table or list")
    raise AssertionError("unreachable")


def check_key(data: dict, key: str, file: str, where: str) -> Any:
    """Refuse a key that cannot vary; return its current value (None if absent)."""
    head = _path(key)[0] if isinstance(key, str) else ""
    if head in ("sweep", "uncertainty", "title", "label"):
        raise CaseError(file, where, f"{said(key)} cannot vary (it is not part of the physics)")
    if head == "series" and _path(key)[-1] in ("file", "path"):
        raise CaseError(file, where, f"{said(key)} cannot vary: a sweep or sample reads the one series file the case names")
    if key in ("time.keep_temperature", "time.output_every", "time.start", "time.end", "time.duration"):
        raise CaseError(file, where, f"{said(key)} cannot vary: every point keeps the same records at the same times")
    _, _, value = _lookup(data, key, file, where)
    if isinstance(value, (dict, list)):
        raise CaseError(file, where, f"{said(key)} is a table or list; name one value inside it")
    return value


def with_values(data: dict, settings: dict[str, Any]) -> dict:
    """A deep copy of the case ``data`` with each dotted key set to its value."""
    out = dict(data)
    out.pop("sweep", None)
    out.pop("uncertainty", None)
    for key, value in settings.items():
        # copy only the tables and lists on the key's path (the rest is shared, never changed)
        node: Any = out
        parts = _path(key)
        for part in parts[:-1]:
            index = int(part) - 1 if isinstance(node, list) else part
            node[index] = copy.copy(node[index])
            node = node[index]
        container, part, _ = _lookup(out, key, "<case>", key)
        container[part] = value
    return out


def quantity_parts(value: Any, file: str, where: str) -> tuple[float, str] | None:
    """(number, unit text) of a case value; None for a word (``"auto"``, a material name)."""
    if isinstance(value, bool):
        return None
    if isinstance(value, (int, float)):
        return float(value), ""
    if isinstance(value, str) and re.match(r"\s*[-+]?(\d|\.\d)", value):
        return checked_text(value, file=file, key=where)
    return None


def convert(number: float, unit: str, to: str, file: str, where: str) -> float:
    """``number`` in ``unit`` expressed in ``to`` (temperatures as temperatures)."""
    if unit == to:
        return number
    try:
        return float(registry().Quantity(number, unit).to(to).magnitude)
    except Exception as exc:  # pint raises several unrelated types
        raise CaseError(file, where, f"cannot express {number:g} {unit} in {to} ({type(exc).__name__})") from None


def _table(value: Any, file: str, where: str) -> dict:
    if not isinstance(value, dict):
        raise CaseError(file, where, "must be a table")
    return value


def _unknown(table: dict, allowed: tuple[str, ...], file: str, where: str) -> None:
    for name in table:
        if name not in allowed:
            raise CaseError(file, f"{where}.{name}", f"unknown key; use {', '.join(allowed)}")


def parse_sweep(value: Any, data: dict, file: str) -> tuple[SweepDim, ...]:
    """Read ``[[sweep]]`` (an array of tables) against the case ``data``."""
    if value is None:
        return ()
    if not isinstance(value, list) or not value or not all(isinstance(t, dict) for t in value):
        raise CaseError(file, "sweep", "must be one or more [[sweep]] tables (name, key, values or range)")
    dims: list[SweepDim] = []
    points = 1
    for i, table in enumerate(value, start=1):
        where = f"sweep[{i}]"
        _unknown(table, ("name", "key", "values", "range"), file, where)
        name = table.get("name")
        if not isinstance(name, str) or not _NAME.match(name):
            raise CaseError(file, f"{where}.name", f"must be a name of letters, digits and _ (starting with a letter), got {name!r}")
        if name in RESERVED or name.startswith(RESERVED_STEMS):
            raise CaseError(file, f"{where}.name", f"{name!r} is (or looks like) a name of the result already; choose another name")
        if any(d.name == name for d in dims):
            raise CaseError(file, f"{where}.name", f"{name!r} names two sweep tables")
        key = table.get("key")
        check_key(data, key, file, f"{where}.key")
        if any(d.key == key for d in dims):
            raise CaseError(file, f"{where}.key", f"{said(key)} is swept by two tables")
        if ("values" in table) == ("range" in table):
            raise CaseError(file, where, "give values = [...] or range = {from, to, count}, one of them")
        if "values" in table:
            values = table["values"]
            if not isinstance(values, list) or not values:
                raise CaseError(file, f"{where}.values", "must be a non-empty list")
            if any(isinstance(v, (dict, list)) for v in values):
                raise CaseError(file, f"{where}.values", "must be single values (numbers, quantities or words)")
            values = list(values)
        else:
            values = _range(_table(table["range"], file, f"{where}.range"), file, f"{where}.range")
        points *= len(values)
        if points > MAX_POINTS:
            raise CaseError(file, f"{where}.values", f"makes the sweep more than {MAX_POINTS} points; sweep fewer values")
        coordinate, units = _coordinate(values, file, f"{where}.values")
        dims.append(SweepDim(name=name, key=key, values=tuple(values), coordinate=coordinate, units=units))
    return tuple(dims)


def _range(table: dict, file: str, where: str) -> list:
    _unknown(table, ("from", "to", "count"), file, where)
    for name in ("from", "to", "count"):
        if name not in table:
            raise CaseError(file, f"{where}.{name}", "is required")
    count = table["count"]
    if isinstance(count, bool) or not isinstance(count, int) or not 2 <= count <= MAX_POINTS:
        raise CaseError(file, f"{where}.count", f"must be a whole number from 2 to {MAX_POINTS}")
    low = quantity_parts(table["from"], file, f"{where}.from")
    high = quantity_parts(table["to"], file, f"{where}.to")
    if low is None or high is None:
        raise CaseError(file, where, "from and to must be numbers or quantities with units")
    unit = low[1]
    top = convert(high[0], high[1], unit, file, f"{where}.to") if high[1] else high[0]
    if bool(low[1]) != bool(high[1]):
        raise CaseError(file, where, "give both from and to with units, or both as bare numbers")
    if not (math.isfinite(low[0]) and math.isfinite(top)) or top == low[0]:
        raise CaseError(file, where, "from and to must be finite and different")
    numbers = np.linspace(low[0], top, count)
    return [float(v) if not unit else f"{float(v):.15g} {unit}" for v in numbers]


def _coordinate(values: list, file: str, where: str) -> tuple[np.ndarray, str]:
    """The coordinate of a sweep dimension: numbers in the first value's unit,
    or the values as text where any is a word."""
    parts = [quantity_parts(v, file, where) for v in values]
    if any(p is None for p in parts):
        texts = [str(v) for v in values]
        if len(set(texts)) != len(texts):
            raise CaseError(file, where, "has the same value twice")
        return np.array(texts, dtype=object), ""
    unit = parts[0][1]
    if any(bool(p[1]) != bool(unit) for p in parts):
        raise CaseError(file, where, "give every value with a unit, or every value as a bare number")
    numbers = [convert(p[0], p[1], unit, file, where) if unit else p[0] for p in parts]
    if len(set(numbers)) != len(numbers):
        raise CaseError(file, where, "has the same value twice")
    return np.array(numbers, dtype=float), unit


def parse_uncertainty(value: Any, data: dict, file: str) -> UncertaintySpec | None:
    """Read ``[uncertainty]`` against the case ``data``."""
    if value is None:
        return None
    table = _table(value, file, "uncertainty")
    _unknown(table, ("samples", "seed", "confidence", "vary"), file, "uncertainty")
    samples = table.get("samples", 1000)
    if isinstance(samples, bool) or not isinstance(samples, int) or not 8 <= samples <= MAX_SAMPLES:
        raise CaseError(file, "uncertainty.samples", f"must be a whole number from 8 to {MAX_SAMPLES}")
    seed = table.get("seed", 0)
    if isinstance(seed, bool) or not isinstance(seed, int) or seed < 0:
        raise CaseError(file, "uncertainty.seed", "must be a whole number, 0 or more")
    confidence = table.get("confidence", 0.95)
    parts = quantity_parts(confidence, file, "uncertainty.confidence")
    if parts is None:
        raise CaseError(file, "uncertainty.confidence", "must be a fraction like 0.95 or \"95 %\"")
    confidence = convert(parts[0], parts[1], "dimensionless", file, "uncertainty.confidence") if parts[1] else parts[0]
    if not 0.5 <= confidence < 1.0:
        raise CaseError(file, "uncertainty.confidence", "must be from 0.5 to below 1 (e.g. 0.95)")
    vary = _table(table.get("vary"), file, "uncertainty.vary") if "vary" in table else {}
    if not vary:
        raise CaseError(file, "uncertainty.vary", "name at least one case key to vary")
    entries = []
    for key, spec in vary.items():
        where = f"uncertainty.vary.{key}" if key.isprintable() and len(key) <= 60 else f"uncertainty.vary[{said(key)}]"
        base = check_key(data, key, file, where)
        spec = _table(spec, file, where)
        _unknown(spec, ("relative_sd", "sd", "low", "high"), file, where)
        if "low" in spec or "high" in spec:
            if "relative_sd" in spec or "sd" in spec or "low" not in spec or "high" not in spec:
                raise CaseError(file, where, "give low and high (uniform), or sd or relative_sd (normal about the case's value)")
            low = quantity_parts(spec["low"], file, f"{where}.low")
            high = quantity_parts(spec["high"], file, f"{where}.high")
            if low is None or high is None or bool(low[1]) != bool(high[1]):
                raise CaseError(file, where, "low and high must both be numbers, or both quantities with units")
            top = convert(high[0], high[1], low[1], file, f"{where}.high") if low[1] else high[0]
            if not (math.isfinite(low[0]) and math.isfinite(top)) or top <= low[0]:
                raise CaseError(file, f"{where}.high", "must be above low")
            entries.append(Varied(key=key, distribution="uniform", units=low[1], low=low[0], high=top))
            continue
        if ("relative_sd" in spec) == ("sd" in spec):
            raise CaseError(file, where, "give sd or relative_sd (normal about the case's value), or low and high (uniform)")
        mean = quantity_parts(base, file, where) if base is not None else None
        if mean is None:
            raise CaseError(file, where, f"a normal spread needs a number or quantity at {said(key)} in the case, found {said(base)}")
        if "relative_sd" in spec:
            rel = quantity_parts(spec["relative_sd"], file, f"{where}.relative_sd")
            if rel is None:
                raise CaseError(file, f"{where}.relative_sd", "must be a fraction like 0.08 or \"8 %\"")
            fraction = convert(rel[0], rel[1], "dimensionless", file, f"{where}.relative_sd") if rel[1] else rel[0]
            if not 0.0 < fraction <= 0.5:
                raise CaseError(file, f"{where}.relative_sd", "must be above 0 and at most 50 %")
            if mean[1] in ("degC", "°C", "degF", "°F", "K", "kelvin"):
                raise CaseError(file, f"{where}.relative_sd", "a temperature has no relative spread; give sd in K")
            sd = abs(mean[0]) * fraction
        else:
            spread = quantity_parts(spec["sd"], file, f"{where}.sd")
            if spread is None or bool(spread[1]) != bool(mean[1]):
                raise CaseError(file, f"{where}.sd", "must be a quantity in a unit like the case's value (a bare number if it is bare)")
            def as_difference(unit: str) -> str:
                return unit.replace("degC", "delta_degC").replace("degF", "delta_degF")

            to = as_difference(mean[1]) if mean[1] else ""
            sd = convert(spread[0], as_difference(spread[1]), to, file, f"{where}.sd") if to else spread[0]
        if not (math.isfinite(sd) and sd > 0):
            raise CaseError(file, where, "the spread must be positive")
        entries.append(Varied(key=key, distribution="normal", units=mean[1], mean=mean[0], sd=sd))
    return UncertaintySpec(samples=samples, seed=seed, confidence=confidence, vary=tuple(entries))
