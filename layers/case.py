"""Case file (TOML) to a validated case in SI units.

Every check that the user can act on raises :class:`~layers.errors.CaseError`
with the file, the dotted key and the reason.  Quantities are parsed once,
here; the objects returned hold plain floats in SI (temperatures in degC) and
forcing functions of time.
"""

from __future__ import annotations

import contextlib
import contextvars
import dataclasses
import datetime as dt
import hashlib
import math
import re
import tomllib
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from layers.constants import ABSOLUTE_ZERO_CELSIUS, ISO6946_RSE, ISO6946_RSI_HORIZONTAL
from layers.errors import CaseError
from layers.materials import Material, material_from_table, resolve, resolve_membrane, vapour_resistance_factor_problem
from layers.mesh import GEOMETRIES, LayerSpec, Mesh, MeshRule, build_mesh
from layers.series import RANGES, Clock, ColumnSpec, Forcing, Series, daily_cycle, read_series
from layers.units import parse_quantity, parse_temperature
from layers.solar import Site
from layers.variation import SweepDim, UncertaintySpec, parse_sweep, parse_uncertainty

BOUNDARY_TYPES = ("film", "temperature", "flux", "adiabatic", "contents")
INITIAL_WORDS = ("steady", "periodic")
DEFAULT_START = "2026-01-01T00:00"
#: Film keys that describe the surface exchange and only matter when it is computed.
PIPE_ORIENTATIONS = ("horizontal", "vertical")
AUTO_ONLY_KEYS = ("emissivity", "wind_speed", "radiant_temperature", "sky_temperature", "jacket", "tilt", "heat_flow_direction")
#: A single layer thicker than this is taken for a unit slip [m].
MAX_LAYER_THICKNESS = 20.0
#: A length written as a bare number (metres) this long or longer is taken for
#: millimetres written without their unit, and refused with a hint [m].
BARE_LENGTH_LIMIT = 1.0
#: Thinnest solid layer [m] (a coat of paint is about 50 um; thinner is a typing slip).
MIN_LAYER_THICKNESS = 1e-6
#: Most cells a case may have: far beyond what any layered construction needs,
#: low enough to catch a max_cell written in the wrong unit.
MAX_CELLS = 20000
#: The tables and keys of the top level of a case file.
TOP_LEVEL_KEYS = ("title", "label", "geometry", "materials", "layers", "mesh", "series", "site", "inside", "outside", "time", "sizing", "sweep", "uncertainty", "condensation")


class _Table:
    """A TOML table being read: remembers which keys were used, refuses the others."""

    def __init__(self, data: Any, file: str, where: str) -> None:
        if not isinstance(data, dict):
            raise CaseError(file, where or "(top level)", f"expected a table, got {type(data).__name__}")
        self.data = data
        self.file = file
        self.where = where
        self.used: set[str] = set()
        self.known: set[str] = set()  # every key asked about: the vocabulary for "did you mean"

    def key(self, name: str) -> str:
        return f"{self.where}.{name}" if self.where else name

    def has(self, name: str) -> bool:
        self.known.add(name)
        return name in self.data

    def get(self, name: str, default: Any = None, required: bool = False) -> Any:
        self.used.add(name)
        self.known.add(name)
        if name not in self.data:
            if required:
                import difflib

                typo = difflib.get_close_matches(name, [k for k in self.data if k not in self.known], n=1)
                hint = f" (is {typo[0]!r} a misspelling of it?)" if typo else ""
                raise CaseError(self.file, self.key(name), f"is required{hint}")
            return default
        return self.data[name]

    def error(self, name: str, reason: str) -> CaseError:
        return CaseError(self.file, self.key(name), reason)

    def finish(self, allowed_extra: tuple[str, ...] = ()) -> None:
        unknown = [k for k in self.data if k not in self.used and k not in allowed_extra]
        if unknown:
            import difflib

            name = unknown[0]
            close = difflib.get_close_matches(name, sorted(self.known | set(allowed_extra)), n=1)
            hint = f" (did you mean {close[0]!r}?)" if close else ""
            raise CaseError(self.file, self.key(name), f"unknown key{hint}")


@dataclass(frozen=True)
class BoundarySpec:
    """One boundary of the construction, in SI.

    Forcings are functions of UTC ``datetime64`` times returning SI values.
    """

    side: str
    kind: str
    air_temperature: Forcing | None = None          # [degC]
    surface_resistance: float | None = None         # [m2 K W-1] of the film; None with auto
    auto_film: bool = False
    surface_temperature: Forcing | None = None      # [degC]
    heat_flux: Forcing | None = None                # [W m-2] into the construction
    emissivity: float = 0.9                         # [-]
    solar_absorptance: float | None = None          # [-]
    solar_irradiance: Forcing | None = None         # [W m-2] on the surface plane
    relative_humidity: Forcing | None = None        # [-] fraction
    wind_speed: Forcing | None = None               # [m s-1]
    radiant_temperature: Forcing | None = None      # [degC] surroundings for radiation (auto film)
    sky_temperature: Forcing | None = None          # [degC]
    heat_flow_direction: str = "auto"               # ISO 6946: up | horizontal | down | auto (from tilt and the sign of air - surface)
    tilt: float = 90.0                              # [deg] of the construction's outside face: 90 wall, 0 flat roof, 180 floor over a cold space
    solar_irradiance_on: str = "surface"            # surface | horizontal (then transposed, layers.solar)
    surface_azimuth: float | None = None            # [deg] 0 north, 90 east, 180 south, 270 west
    albedo: float = 0.2                             # [-] of the ground, for the reflected share
    irradiance_stamp: str = "end"                   # where in its interval each irradiance value is stamped
    solar_split: str = ""                           # how direct and diffuse were obtained (transposed only)
    orientation: str = "horizontal"                 # pipes: horizontal | vertical
    jacket: str | None = None
    contents: str | None = None
    initial_temperature: float | None = None        # [degC] of the contents
    values: dict[str, Any] = field(default_factory=dict, repr=False)


@dataclass(frozen=True)
class TimePlan:
    """When and how to march.

    Attributes
    ----------
    start : numpy.datetime64
        UTC start of the run.
    duration, step, output_every, period : float
        [s]
    initial : float or str
        Initial temperature [degC], ``"steady"`` or ``"periodic"``.
    scheme : str
    """

    start: np.datetime64
    duration: float
    step: float
    output_every: float
    initial: float | str
    scheme: str
    period: float = 86400.0
    keep_temperature: bool | None = None  # the cell field in the result; None: runs yes, sweeps no
    start_zone: str = ""                  # how start was read: its own offset, the series' time zone, or UTC

    @property
    def n_steps(self) -> int:
        return int(round(self.duration / self.step))

    @property
    def output_stride(self) -> int:
        return int(round(self.output_every / self.step))


@dataclass(frozen=True)
class SizingSpec:
    """The ``[sizing]`` table, in SI."""

    layer: int                                   # 1-based, among the thermal layers (Case.layers)
    thicknesses: tuple[float, ...]               # [m]
    max_surface_temperature: float | None = None  # [degC]
    dew_point_margin: float | None = None        # [K]
    max_heat_loss: float | None = None           # [W m-2 | W m-1 | W]
    min_freeze_time: float | None = None         # [s]
    max_ice_fraction: float = 0.25               # [-]
    design_time: np.datetime64 | None = None     # UTC; None: the run's start
    case_layer: int = 0                          # 1-based, as the case file counts (membranes included); 0: = layer

    @property
    def listed(self) -> int:
        """The sized layer's number as the case file writes it (membranes counted)."""
        return self.case_layer or self.layer


@dataclass(frozen=True)
class VapourLayer:
    """One layer of the case's list as the vapour calculation (ISO 13788) sees it.

    Every ``[[layers]]`` table has one, membranes included, in the case's
    order; the thermal layers (``Case.layers``) leave the membranes out.

    Attributes
    ----------
    number : int
        1-based position in the case file's list of layers.
    name : str
    kind : str
        ``solid``, ``air-gap`` or ``membrane``.
    thermal_index : int or None
        1-based position in ``Case.layers`` (None for a membrane, which has
        no thermal part).
    thickness : float
        [m] (0 for a membrane; an air gap's given thickness, 0 when none).
    material : Material or None
        The solid layer's material.
    vapour_resistance_factor : float or None
        The layer's own ``vapour_resistance_factor`` [-], which overrides its
        material's (both cups); None: the material's.
    equivalent_air_thickness : float or None
        A membrane's s_d [m].
    """

    number: int
    name: str
    kind: str
    thermal_index: int | None
    thickness: float = 0.0
    material: Material | None = None
    vapour_resistance_factor: float | None = None
    equivalent_air_thickness: float | None = None


@dataclass(frozen=True)
class CondensationSpec:
    """The ``[condensation]`` table: ISO 13788 monthly mean climate, January first.

    Every array has 12 values, one per calendar month.

    Attributes
    ----------
    inside_temperature, outside_temperature : numpy.ndarray
        Monthly mean air temperatures [degC].
    outside_relative_humidity : numpy.ndarray
        [-] fraction in (0, 1].
    inside_relative_humidity : numpy.ndarray or None
        [-] fraction in (0, 1]; None with ``humidity_class``.
    humidity_class : int or None
        ISO 13788 Annex A internal humidity class 1-5 (the inside vapour
        pressure is the outside one plus the class's excess); None with
        ``inside_relative_humidity``.
    vapour_data : str
        ``dry-cup`` (default) or ``wet-cup``: which ISO 10456 value of mu is used.
    """

    inside_temperature: np.ndarray
    outside_temperature: np.ndarray
    outside_relative_humidity: np.ndarray
    inside_relative_humidity: np.ndarray | None = None
    humidity_class: int | None = None
    vapour_data: str = "dry-cup"


@dataclass
class Case:
    """A validated case: geometry, layers, boundaries, forcing and time plan."""

    path: str
    text: str
    sha256: str
    title: str
    geometry: str
    inner_radius: float
    layers: tuple[LayerSpec, ...]
    mesh_rule: MeshRule
    inside: BoundarySpec
    outside: BoundarySpec
    time: TimePlan
    series: Series | None = None
    sizing: SizingSpec | None = None
    materials: dict[str, Material] = field(default_factory=dict)
    label: str = ""
    orientation: str = "horizontal"     # cylinders: horizontal | vertical
    height: float | None = None         # vertical cylinder: height of the run [m]
    provenance: dict[str, str] = field(default_factory=dict)  # a re-run: where it came from
    sweep: tuple[SweepDim, ...] = ()     # [[sweep]] dimensions
    uncertainty: UncertaintySpec | None = None
    record_paths: bool = False  # record the user's absolute case and series paths in results
    base_dir: Path | None = None  # where its series file was looked for
    time_zones: dict[str, str] = field(default_factory=dict)  # each time read -> the zone it was read in (check, run attribute)
    vapour_layers: tuple[VapourLayer, ...] = ()  # every [[layers]] table, membranes included (ISO 13788)
    condensation: CondensationSpec | None = None  # the [condensation] table

    @property
    def stem(self) -> str:
        return Path(self.path).stem

    def listed(self, thermal_number: int) -> int:
        """The case file's number (membranes counted) of thermal layer ``thermal_number`` (1-based in ``layers``)."""
        for vl in self.vapour_layers:
            if vl.thermal_index == thermal_number:
                return vl.number
        return thermal_number

    def mesh(self) -> Mesh:
        """The finite-volume mesh of this case (:func:`layers.mesh.build_mesh`), built once."""
        key = (self.layers, self.mesh_rule, self.geometry, self.inner_radius)
        cached = self.__dict__.get("_mesh")
        if cached is None or any(a is not b for a, b in zip(cached[0], key)):
            cached = (key, build_mesh(self.layers, self.mesh_rule, self.geometry, self.inner_radius))
            self.__dict__["_mesh"] = cached
        return cached[1]

    @property
    def reference_unit(self) -> str:
        """What the per-unit quantities refer to: m2 of wall, m of pipe, whole sphere."""
        return {"planar": "m2", "cylinder": "m", "sphere": "sphere"}[self.geometry]

    def seconds(self, times: np.ndarray) -> np.ndarray:
        return (np.asarray(times) - self.time.start) / np.timedelta64(1, "s")

    def datetimes(self, seconds: np.ndarray) -> np.ndarray:
        return self.time.start + (np.asarray(seconds) * 1e6).astype("timedelta64[us]")


# --------------------------------------------------------------------------- #
# reading


def base_name(name: str) -> str:
    """The last component of a file name written with ``/`` or ``\\`` separators."""
    return name.replace("\\", "/").rstrip("/").rsplit("/", 1)[-1]


def load_case(path: str | Path, *, series_dir: Path | None = None) -> Case:
    """Read and validate a case file.

    Parameters
    ----------
    path : str or Path
        The TOML case file.
    series_dir : Path, optional
        Look for the series file by its base name in this folder, whatever
        folder the case names (used to re-run an archived case in private).

    Raises
    ------
    CaseError
        For any input the user must correct.
    """
    path = Path(path)
    file = str(path)
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise CaseError(file, "(file)", f"cannot read the case file ({exc.strerror})") from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        raise CaseError(file, "(file)", "is not UTF-8 text") from None
    return parse_case(read_toml(text, file), file=file, text=text, base_dir=path.parent, series_dir=series_dir)


def read_toml(text: str, file: str = "<case>") -> dict:
    """Parse case text (TOML); a syntax error is a :class:`CaseError` naming ``file``."""
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise CaseError(file, "(syntax)", f"malformed TOML: {exc}") from None


def parse_case(
    data: dict, *, file: str = "<case>", text: str = "", base_dir: Path | None = None, series_dir: Path | None = None
) -> Case:
    """Validate an already-parsed TOML document (see :func:`load_case`)."""
    base_dir = base_dir or Path(".")
    top = _Table(data, file, "")
    # unknown top-level keys first, so that a misspelt table is named before
    # anything that depends on it complains
    top.known.update(TOP_LEVEL_KEYS)
    for name in data:
        if name not in TOP_LEVEL_KEYS:
            top.finish(allowed_extra=tuple(k for k in data if k != name))
    title = top.get("title", "")
    if not isinstance(title, str):
        raise top.error("title", "must be a string")
    label = top.get("label", "")

    # geometry
    geo = _Table(top.get("geometry", {}), file, "geometry")
    geometry = geo.get("kind", "planar")
    if geometry not in GEOMETRIES:
        raise geo.error("kind", f"unknown geometry {geometry!r}; use one of {', '.join(GEOMETRIES)}")
    inner_radius = 0.0
    if geometry != "planar":
        value = geo.get("inner_radius", required=True)
        inner_radius = parse_quantity(value, "length", file=file, key=geo.key("inner_radius"))
        if inner_radius <= 0:
            raise geo.error("inner_radius", "must be positive")
        if inner_radius > MAX_LAYER_THICKNESS or (isinstance(value, (int, float)) and inner_radius >= BARE_LENGTH_LIMIT):
            raise geo.error(
                "inner_radius",
                f"{inner_radius:g} m is implausible for a pipe or vessel"
                + (f" (bare numbers are metres; did you mean \"{value} mm\"?)" if isinstance(value, (int, float)) else ""),
            )
    elif geo.has("inner_radius"):
        raise geo.error("inner_radius", "applies to cylinder and sphere geometry only")
    pipe_orientation = geo.get("orientation", "horizontal")
    height = None
    if geo.has("orientation") and geometry != "cylinder":
        raise geo.error("orientation", "applies to cylinder geometry only")
    if pipe_orientation not in PIPE_ORIENTATIONS:
        raise geo.error("orientation", f"unknown orientation {pipe_orientation!r}; use one of {', '.join(PIPE_ORIENTATIONS)}")
    if pipe_orientation == "vertical":
        height = parse_quantity(geo.get("height", required=True), "length", file=file, key=geo.key("height"))
        if height <= 0:
            raise geo.error("height", "must be positive")
    elif geo.has("height"):
        raise geo.error("height", "applies to a vertical pipe only (orientation = \"vertical\")")
    geo.finish()

    # materials defined in the case
    materials: dict[str, Material] = {}
    mats = _Table(top.get("materials", {}), file, "materials")
    for name in list(mats.data):
        mats.get(name)
        materials[name] = material_from_table(
            name, mats.data[name], file=file, key=f"materials.{name}", library=True
        )

    layers, vapour_layers = _parse_layers(top.get("layers", required=True), materials, file)
    rule = _parse_mesh(_Table(top.get("mesh", {}), file, "mesh"))
    cells = sum(layer.cells if layer.cells else rule.estimated_cells(layer.thickness) for layer in layers if layer.material is not None)
    if cells > MAX_CELLS:
        key = "mesh.first_cell" if rule.first_cell is not None and rule.first_cell < rule.max_cell / 4.0 else "mesh.max_cell"
        raise CaseError(
            file, key,
            f"gives about {cells} cells (the limit is {MAX_CELLS}; a few hundred resolve any wall or pipe); "
            f"use a larger {key.split('.')[1]}",
        )

    # series and cycles
    series, cycles, columns_kind, timezone = _parse_series(top.get("series"), file, base_dir, series_dir)

    site = _parse_site(_Table(top.get("site"), file, "site")) if top.has("site") else None
    forcing_ctx = _ForcingContext(file, series, cycles, columns_kind, timezone, site)
    tilt = _construction_tilt(data, file, geometry)
    inside = _parse_boundary(top.get("inside", required=True), "inside", geometry, forcing_ctx, pipe_orientation, tilt, data.get("outside"))
    outside = _parse_boundary(top.get("outside", required=True), "outside", geometry, forcing_ctx, pipe_orientation, tilt, data.get("inside"))
    if outside.kind == "contents":
        raise CaseError(file, "outside.type", "a contents boundary fills the bore: use it on the inside")
    if inside.kind == "contents" and geometry == "planar":
        raise CaseError(file, "inside.type", "a contents boundary needs cylinder or sphere geometry")

    time = _parse_time(_Table(top.get("time", {}), file, "time"), series, timezone)
    time_zones = _time_zones(data, file, series, cycles, timezone)
    time = dataclasses.replace(time, start_zone=time_zones["time.start"])
    _check_budget(file, cells, len(layers), time)
    for spec in (inside, outside):
        for name, forcing in spec.values.items():
            span = forcing.span() if isinstance(forcing, Forcing) else None
            if span is not None:
                end = time.start + np.timedelta64(int(round(time.duration)), "s")
                if time.start < span[0] or end > span[1]:
                    raise CaseError(
                        file,
                        f"{spec.side}.{name}",
                        f"the run ({_iso(time.start)} to {_iso(end)}) reaches outside the series "
                        f"{series.file if series else ''} ({_iso(span[0])} to {_iso(span[1])})",
                    )
    if time.initial in INITIAL_WORDS and inside.kind in ("flux", "adiabatic") and outside.kind in ("flux", "adiabatic"):
        raise CaseError(
            file, "time.initial", f"{time.initial!r} needs a boundary that fixes a temperature (film or temperature); give a starting temperature"
        )
    if time.initial == "periodic" and inside.kind == "contents":
        raise CaseError(
            file,
            "time.initial",
            "'periodic' does not apply with stagnant contents (they only cool: there is no repeating state); "
            "use 'steady' (the insulation in steady state with the contents at their initial_temperature) or a temperature",
        )

    sweep = parse_sweep(top.get("sweep"), data, file)
    uncertainty = parse_uncertainty(top.get("uncertainty"), data, file)
    if sweep and uncertainty is not None:
        raise CaseError(file, "uncertainty", "a case sweeps or samples, not both at once (run the sweep, then sample the chosen design)")
    if geometry == "planar":  # a pipe's process temperatures may well be 263 to 374 degC
        _warn_kelvin_looking(data, file)
        _warn_unclimatic_air(file, inside, outside)
    sizing = None
    if top.has("sizing"):
        sizing = _parse_sizing(_Table(top.get("sizing"), file, "sizing"), layers, geometry, inside, outside, time, timezone,
                               vapour_layers)
    condensation = None
    if top.has("condensation"):
        condensation = _parse_condensation(_Table(top.get("condensation"), file, "condensation"))
    top.finish()
    return Case(
        path=file,
        text=text,
        sha256=hashlib.sha256(text.encode("utf-8")).hexdigest(),
        title=title or Path(file).stem,
        geometry=geometry,
        inner_radius=inner_radius,
        orientation=pipe_orientation,
        height=height,
        layers=layers,
        mesh_rule=rule,
        inside=inside,
        outside=outside,
        time=time,
        series=series,
        sizing=sizing,
        materials=materials,
        label=str(label),
        sweep=sweep,
        uncertainty=uncertainty,
        base_dir=base_dir,
        time_zones=time_zones,
        vapour_layers=vapour_layers,
        condensation=condensation,
    )


#: Bare numbers in this range [degC] look like room or weather temperatures written in kelvin.
KELVIN_LOOKING = (263.0, 374.0)


#: The air temperatures any building's climate stays within [degC]: the lowest
#: and highest air temperatures measured on Earth are about -89 and +57 degC
#: (World Meteorological Organization archive, from memory), with a margin.
CLIMATE_AIR_RANGE = (-90.0, 70.0)


def _warn_unclimatic_air(file: str, *sides: BoundarySpec) -> None:
    """Warn when a wall's air temperature series leaves any climate: a weather
    column in kelvin declared as degC reads as 250 to 310 degC, and nothing
    else would say so (a process or an oven is a cylinder, a sphere, or a held
    surface temperature)."""
    import warnings

    low, high = CLIMATE_AIR_RANGE
    for spec in sides:
        forcing = spec.values.get("air_temperature") if spec.kind == "film" else None
        values = getattr(forcing, "_v", None)
        if values is None or not np.isfinite(values).any():
            continue
        lo, hi = float(np.nanmin(values)), float(np.nanmax(values))
        if lo < low or hi > high:
            hint = " (a column in kelvin declared as degC?)" if 200.0 < lo and hi < 340.0 else ""
            warnings.warn(
                f"{file}: {spec.side}.air_temperature: the series runs from {lo:.4g} to {hi:.4g} degC, outside any "
                f"climate ({low:g} to {high:g} degC){hint}: check the column and its unit",
                UserWarning, stacklevel=4,
            )


def _warn_kelvin_looking(data: dict, file: str) -> None:
    """Warn where a temperature is a bare number that reads like kelvin (e.g.
    293.15) in a case whose other temperatures are ordinary ones (below 100
    degC): bare temperatures are degrees Celsius."""
    found: list[tuple[str, float]] = []   # bare numbers
    written: list[float] = []             # temperatures written with a unit [degC]

    def walk(node: Any, path: str) -> None:
        if isinstance(node, dict):
            for key, value in node.items():
                walk(value, f"{path}.{key}" if path else str(key))
        elif isinstance(node, list):
            for i, value in enumerate(node, start=1):
                walk(value, f"{path}[{i}]")
        elif path.endswith("temperature") or path == "time.initial" or (path.startswith("series.cycles.") and path.endswith(".mean")):
            if isinstance(node, (int, float)) and not isinstance(node, bool):
                found.append((path, float(node)))
            elif isinstance(node, str) and not node.strip().startswith("series:"):
                try:
                    written.append(parse_temperature(node, file=file, key=path))
                except CaseError:
                    pass  # the reader says what is wrong with it

    walk({k: v for k, v in data.items() if k not in ("sweep", "uncertainty", "materials")}, "")
    looking = [(key, v) for key, v in found if KELVIN_LOOKING[0] <= v <= KELVIN_LOOKING[1]]
    ordinary = [v for key, v in found if v < 100.0] + [v for v in written if v < 100.0]
    if looking and ordinary:
        import warnings

        key, value = looking[0]
        warnings.warn(
            f"{file}: {key} = {value:g} is read as {value:g} degC (bare temperatures are degrees Celsius); "
            f"if you meant kelvin, write \"{value:g} K\"",
            UserWarning,
            stacklevel=3,
        )


def _iso(t: np.datetime64) -> str:
    return str(np.datetime_as_string(t, unit="m"))


#: Most time steps a run may take: a century at 1-minute steps (a longer march is a step
#: written in the wrong unit, and would run for hours).
MAX_STEPS = 60_000_000
#: Most memory the kept records of a run may take [bytes].
MAX_RECORD_BYTES = 4 * 2**30


def _check_budget(file: str, cells: int, n_layers: int, time: TimePlan) -> None:
    """Refuse a plan whose step count or kept records are beyond any sensible run,
    before any work, with the numbers and the key to change."""
    if time.n_steps > MAX_STEPS:
        raise CaseError(
            file, "time.step",
            f"{time.duration:g} s in steps of {time.step:g} s is {time.n_steps:.3g} steps (the limit is {MAX_STEPS:.0e}); use a longer step",
        )
    records = time.n_steps // max(time.output_stride, 1) + 1
    size = records * (cells + n_layers + 16) * 8
    if size > MAX_RECORD_BYTES:
        raise CaseError(
            file, "time.output_every",
            f"keeps {records:.3g} records of {cells} cells, about {size / 2**30:.3g} GiB (the limit is "
            f"{MAX_RECORD_BYTES / 2**30:g} GiB); keep fewer records with a longer output_every",
        )


def _positive(value: Any, kind: str, table: _Table, name: str, allow_zero: bool = False) -> float:
    number = parse_quantity(value, kind, file=table.file, key=table.key(name))
    if number < 0 or (number == 0 and not allow_zero):
        raise table.error(name, f"must be {'non-negative' if allow_zero else 'positive'}, got {value!r}")
    return number


def _parse_layers(items: Any, materials: dict[str, Material], file: str) -> tuple[tuple[LayerSpec, ...], tuple[VapourLayer, ...]]:
    """The thermal layers (membranes left out) and every layer as the vapour calculation sees it."""
    if not isinstance(items, list) or not items:
        raise CaseError(file, "layers", "give at least one [[layers]] table")
    out = []
    vapour: list[VapourLayer] = []
    for number, item in enumerate(items, start=1):
        t = _Table(item, file, f"layers[{number}]")
        kind = t.get("kind", "solid")
        if kind == "membrane":
            vapour.append(_parse_membrane(t, number))
            continue
        if kind == "air-gap":
            resistance = _positive(t.get("resistance", required=True), "areal_resistance", t, "resistance")
            thickness = 0.0
            if t.has("thickness"):
                thickness = _positive(t.get("thickness"), "length", t, "thickness", allow_zero=True)
            contact = 0.0
            if t.has("contact_resistance"):
                raise t.error("contact_resistance", "an air gap is itself a resistance; add to its resistance instead")
            t.get("name")
            t.finish()
            out.append(LayerSpec(thickness, None, resistance=resistance, name=str(t.data.get("name", "air gap"))))
            vapour.append(VapourLayer(number, out[-1].name, "air-gap", len(out), thickness=thickness))
            continue
        if kind != "solid":
            raise t.error("kind", f"unknown layer kind {kind!r}; use 'solid' (the default), 'air-gap' or 'membrane'")
        name = t.get("material", required=True)
        if not isinstance(name, str):
            raise t.error("material", "must be a material name")
        material = resolve(name, materials, file=file, key=t.key("material"))
        thickness = _positive(t.get("thickness", required=True), "length", t, "thickness")
        if thickness < MIN_LAYER_THICKNESS:
            raise t.error("thickness", f"{thickness:g} m is thinner than any layer a wall or pipe is built of (at least 1 um); leave the layer out")
        bare = isinstance(t.data["thickness"], (int, float))
        if thickness > MAX_LAYER_THICKNESS or (bare and thickness >= BARE_LENGTH_LIMIT):
            raise t.error(
                "thickness",
                f"{thickness:g} m is implausible for one layer"
                + (f" written as a bare number (bare numbers are metres; did you mean \"{t.data['thickness']} mm\"? "
                   f"write \"{t.data['thickness']} m\" if you mean metres)" if bare else ""),
            )
        contact = 0.0
        if t.has("contact_resistance"):
            contact = _positive(t.get("contact_resistance"), "areal_resistance", t, "contact_resistance", allow_zero=True)
            if number == len(items):
                raise t.error("contact_resistance", "the outermost layer has no next layer to contact")
        cells = t.get("cells")
        if cells is not None and (isinstance(cells, bool) or not isinstance(cells, int) or cells < 1):
            raise t.error("cells", f"must be a whole number >= 1, got {cells!r}")
        mu = None
        if t.has("vapour_resistance_factor"):
            mu = t.get("vapour_resistance_factor")
            problem = vapour_resistance_factor_problem(mu)
            if problem:
                raise t.error("vapour_resistance_factor", problem)
            mu = float(mu)
        t.get("name")
        t.finish()
        out.append(LayerSpec(thickness, material, contact_resistance=contact, cells=cells, name=str(t.data.get("name", name))))
        vapour.append(VapourLayer(number, out[-1].name, "solid", len(out), thickness=thickness, material=material,
                                  vapour_resistance_factor=mu))
    if all(spec.is_gap for spec in out):
        raise CaseError(file, "layers", "needs at least one solid layer")
    return tuple(out), tuple(vapour)


#: The thinnest and thickest s_d a membrane layer may have [m] (below: no sheet;
#: above: beyond any declared product, most likely a slip of unit).
MEMBRANE_SD_RANGE = (1e-3, 5000.0)


def _parse_membrane(t: _Table, number: int) -> VapourLayer:
    """A ``kind = "membrane"`` layer: vapour resistance s_d, no thermal part."""
    name = t.get("material")
    membrane = None
    if name is not None:
        membrane = resolve_membrane(name, file=t.file, key=t.key("material"))
    if t.has("equivalent_air_thickness"):
        sd = _positive(t.get("equivalent_air_thickness"), "length", t, "equivalent_air_thickness")
    elif membrane is not None:
        sd = membrane.equivalent_air_thickness
    else:
        raise t.error("equivalent_air_thickness", "is required for a membrane (its s_d, e.g. \"20 m\"), or name a library "
                                                  "membrane with material = \"...\"")
    if not MEMBRANE_SD_RANGE[0] <= sd <= MEMBRANE_SD_RANGE[1]:
        raise t.error("equivalent_air_thickness", f"{sd:g} m is outside {MEMBRANE_SD_RANGE[0]:g} to {MEMBRANE_SD_RANGE[1]:g} m, "
                                                  "the range of real sheets (s_d is an air-layer thickness in metres)")
    for refused, why in (("thickness", "a membrane has no thermal thickness here; give its s_d as equivalent_air_thickness"),
                         ("contact_resistance", "a membrane carries no thermal resistance"),
                         ("resistance", "a membrane carries no thermal resistance; use kind = \"air-gap\" for one"),
                         ("cells", "a membrane has no cells (no thermal part)"),
                         ("vapour_resistance_factor", "give a membrane's vapour resistance as equivalent_air_thickness (s_d)")):
        if t.has(refused):
            t.get(refused)
            raise t.error(refused, why)
    t.get("name")
    t.finish()
    label = str(t.data.get("name", membrane.name if membrane is not None else "membrane"))
    return VapourLayer(number, label, "membrane", None, equivalent_air_thickness=sd)


#: Vapour data a [condensation] table may choose (ISO 10456 dry-cup or wet-cup mu).
VAPOUR_DATA = ("dry-cup", "wet-cup")
#: The ISO 13788 Annex A internal humidity classes.
HUMIDITY_CLASSES = (1, 2, 3, 4, 5)


def _monthly(t: _Table, name: str, kind: str, required: bool = True) -> np.ndarray | None:
    """A [condensation] quantity: one value for every month, or 12 values (January first)."""
    if not t.has(name):
        if required:
            t.get(name, required=True)
        return None
    raw = t.get(name)
    values = raw if isinstance(raw, list) else [raw]
    if isinstance(raw, list) and len(raw) != 12:
        raise t.error(name, f"give one value for every month or 12 values (January first), got {len(raw)}")
    out = []
    for i, value in enumerate(values, start=1):
        key = t.key(name) if not isinstance(raw, list) else f"{t.key(name)}[{i}]"
        if isinstance(value, bool) or not isinstance(value, (int, float, str)):
            raise CaseError(t.file, key, f"expected a quantity, got {value!r}")
        if isinstance(value, float) and not math.isfinite(value):
            raise CaseError(t.file, key, f"{value!r} is not a finite number")
        if kind == "temperature":
            number = parse_temperature(value, file=t.file, key=key)
            if not -60.0 <= number <= 60.0:
                raise CaseError(t.file, key, f"{number:g} degC is not a monthly mean air temperature (ISO 13788 climates lie "
                                             "within -60 to 60 degC)")
        else:
            number = parse_quantity(value, "fraction", file=t.file, key=key)
            if not 0.0 < number <= 1.0:
                hint = (f"; a bare number is a fraction: write \"{value:g} %\" for {value:g} percent"
                        if isinstance(value, (int, float)) and 1.0 < value <= 100.0 else "")
                raise CaseError(t.file, key, f"relative humidity must be above 0 and at most 100 %, got {value!r}{hint}")
        if not math.isfinite(number):
            raise CaseError(t.file, key, f"{value!r} is not a finite number")
        out.append(number)
    return np.array(out * 12 if len(out) == 1 else out, dtype=float)


def _parse_condensation(t: _Table) -> CondensationSpec:
    """The [condensation] table (ISO 13788 monthly method)."""
    inside = _monthly(t, "inside_temperature", "temperature")
    outside = _monthly(t, "outside_temperature", "temperature")
    outside_rh = _monthly(t, "outside_relative_humidity", "fraction")
    if t.has("inside_relative_humidity") and t.has("humidity_class"):
        t.get("humidity_class")
        raise t.error("humidity_class", "give inside_relative_humidity or humidity_class, not both")
    inside_rh = _monthly(t, "inside_relative_humidity", "fraction", required=False)
    humidity_class = None
    if t.has("humidity_class"):
        humidity_class = t.get("humidity_class")
        if isinstance(humidity_class, bool) or humidity_class not in HUMIDITY_CLASSES:
            raise t.error("humidity_class", f"must be an ISO 13788 internal humidity class 1 to 5, got {humidity_class!r}")
    elif inside_rh is None:
        import difflib

        typo = difflib.get_close_matches("inside_relative_humidity", [k for k in t.data if k not in t.known], n=1)
        hint = f"; is {typo[0]!r} a misspelling of it?" if typo else ""
        raise t.error("inside_relative_humidity", f"is required (or give humidity_class = 1 to 5, ISO 13788 Annex A){hint}")
    vapour_data = t.get("vapour_data", "dry-cup")
    if vapour_data not in VAPOUR_DATA:
        raise t.error("vapour_data", f"must be \"dry-cup\" or \"wet-cup\" (which ISO 10456 mu to use), got {vapour_data!r}")
    t.finish()
    return CondensationSpec(inside, outside, outside_rh, inside_rh, humidity_class, vapour_data)


def _parse_mesh(t: _Table) -> MeshRule:
    max_cell = _positive(t.get("max_cell", "5 mm"), "length", t, "max_cell")
    if max_cell < MIN_LAYER_THICKNESS:
        raise t.error("max_cell", f"{max_cell:g} m is below 1 um: no wall or pipe needs cells that small")
    growth = t.get("growth", 1.25)
    if isinstance(growth, bool) or not isinstance(growth, (int, float)) or not 1.0 <= growth <= 3.0:
        raise t.error("growth", f"must be a number from 1 to 3, got {growth!r}")
    min_cells = t.get("min_cells", 3)
    if isinstance(min_cells, bool) or not isinstance(min_cells, int) or min_cells < 1:
        raise t.error("min_cells", f"must be a whole number >= 1, got {min_cells!r}")
    first = None
    if t.has("first_cell"):
        first = _positive(t.get("first_cell"), "length", t, "first_cell")
        if first < MIN_LAYER_THICKNESS:
            raise t.error("first_cell", f"{first:g} m is below 1 um: no wall or pipe needs cells that small")
    t.finish()
    return MeshRule(max_cell=max_cell, growth=float(growth), min_cells=min_cells, first_cell=first)


_KIND_BY_DIMENSION = {
    "temperature": ("degC", "K", "degF", "kelvin", "degree_Celsius", "degree_Fahrenheit"),
}


def _column_kind(unit: str) -> str:
    from layers.units import KINDS, ureg

    try:
        q = ureg.Quantity(1.0, unit)
    except Exception:
        return "unknown"
    if q.check("[temperature]"):
        return "temperature"
    for kind in ("irradiance", "speed", "fraction", "film_coefficient", "linear_heat_flow"):
        try:
            q.to(KINDS[kind][0])
            return kind
        except Exception:
            continue
    return "unknown"


#: While :func:`reusing_series` is active: series tables already read, by what
#: they say and where they were read from (the variants of a sweep share one).
#: A context variable, so that threads (a dask worker's) each have their own.
_SERIES_READ: contextvars.ContextVar[dict | None] = contextvars.ContextVar("layers_series_read", default=None)


@contextlib.contextmanager
def reusing_series():
    """Read each distinct ``[series]`` table once while the block runs (a sweep
    parses its case once per point; the series file does not change meanwhile)."""
    token = _SERIES_READ.set(_SERIES_READ.get() if _SERIES_READ.get() is not None else {})
    try:
        yield
    finally:
        _SERIES_READ.reset(token)


def _parse_series(value: Any, file: str, base_dir: Path, series_dir: Path | None = None):
    read = _SERIES_READ.get()
    if read is not None and value is not None:
        key = (repr(value), file, str(base_dir), str(series_dir))
        if key not in read:
            read[key] = _read_series_table(value, file, base_dir, series_dir)
        return read[key]
    return _read_series_table(value, file, base_dir, series_dir)


def _read_series_table(value: Any, file: str, base_dir: Path, series_dir: Path | None = None):
    if value is None:
        return None, {}, {}, "UTC"
    t = _Table(value, file, "series")
    timezone = t.get("timezone", "UTC")
    cycles: dict[str, Callable] = {}
    cyc = _Table(t.get("cycles", {}), file, "series.cycles")
    for name in list(cyc.data):
        cyc.get(name)
        c = _Table(cyc.data[name], file, f"series.cycles.{name}")
        mean = parse_temperature(c.get("mean", required=True), file=file, key=c.key("mean"))
        amplitude = parse_quantity(c.get("amplitude", required=True), "temperature_difference", file=file, key=c.key("amplitude"))
        if amplitude < 0:
            raise c.error("amplitude", "must be non-negative")
        if mean - amplitude <= ABSOLUTE_ZERO_CELSIUS:
            raise c.error("amplitude", f"takes the cycle to {mean - amplitude:.4g} degC, at or below absolute zero")
        peak = c.get("peak_hour", 15)
        if isinstance(peak, bool) or not isinstance(peak, (int, float)) or not 0 <= peak < 24:
            raise c.error("peak_hour", f"must be an hour from 0 to 24, got {peak!r}")
        period = _positive(c.get("period", "24 h"), "duration", c, "period")
        c.finish()
        cycles[name] = (daily_cycle(mean, amplitude, float(peak), period, timezone=timezone), period)
    columns_kind: dict[str, str] = {}
    series = None
    if t.has("file"):
        fname = t.get("file")
        if not isinstance(fname, str):
            raise t.error("file", "must be a file name")
        cols = _Table(t.get("columns", required=True), file, "series.columns")
        specs = []
        for name in list(cols.data):
            cols.get(name)
            c = _Table(cols.data[name], file, f"series.columns.{name}")
            column = c.get("column", name)
            unit = c.get("unit", required=True)
            if not isinstance(unit, str):
                raise c.error("unit", "must be a unit string such as 'degC' or 'W/m2'")
            from layers.units import checked_text

            checked_text(unit, file=file, key=c.key("unit"), unit_only=True)
            kind = _column_kind(unit)
            if kind == "unknown":
                raise c.error("unit", f"unit {unit!r} is not a temperature, irradiance, speed or fraction")
            c.finish()
            specs.append(ColumnSpec(name=name, column=str(column), unit=unit, kind=kind))
            columns_kind[name] = kind
        fill = t.get("fill_gaps")
        fill_s = _positive(fill, "duration", t, "fill_gaps") if fill is not None else None
        max_interval = t.get("max_interval")
        max_s = _positive(max_interval, "duration", t, "max_interval") if max_interval is not None else None
        time_col = t.get("time", "time")
        if not isinstance(time_col, str):
            raise t.error("time", f"must be the name of the time column, got {time_col!r}")
        embed = t.get("embed_series", False)
        if not isinstance(embed, bool):
            raise t.error("embed_series", "must be true or false")
        path = Path(fname)
        if series_dir is not None:
            path = series_dir / base_name(fname)
        elif not path.is_absolute():
            path = base_dir / path
        series = read_series(
            path, specs, time=time_col, timezone=timezone, fill_gaps=fill_s, max_interval=max_s, case_file=file
        )
        if embed:
            raw = path.read_bytes()
            if raw[:4] in (b"CDF\x01", b"CDF\x02", b"\x89HDF"):
                raise t.error("embed_series", "embedding works for CSV series; keep the netCDF file beside the run")
            series.embedded = raw.decode("utf-8", errors="replace")
    else:
        for name in ("columns", "time", "fill_gaps", "max_interval", "embed_series"):
            if t.has(name):
                raise t.error(name, "needs series.file")
    t.finish()
    for name in cycles:
        columns_kind[name] = "temperature"
    return series, cycles, columns_kind, timezone


@dataclass
class _ForcingContext:
    file: str
    series: Series | None
    cycles: dict
    kinds: dict[str, str]
    timezone: str
    site: Site | None = None

    def forcing(self, value: Any, kind: str, key: str) -> Forcing:
        """A constant or a ``"series:NAME"`` reference -> Forcing in SI."""
        if isinstance(value, str) and value.strip().lower().startswith("series:") and not value.strip().startswith("series:"):
            raise CaseError(self.file, key, f"write the series reference in lower case: 'series:NAME' (got {value!r})")
        if isinstance(value, str) and value.strip().startswith("series:"):
            name = value.strip()[len("series:"):].strip()
            known = sorted(self.kinds)
            if name not in self.kinds:
                raise CaseError(
                    self.file, key, f"no series named {name!r} (defined: {', '.join(known) or 'none'})"
                )
            have = self.kinds[name]
            want = "irradiance" if kind == "heat_flux" and have == "irradiance" else kind
            if have != want and not (kind == "heat_flux" and have in ("irradiance",)):
                raise CaseError(self.file, key, f"series {name!r} holds {have.replace('_', ' ')} values, not {kind.replace('_', ' ')} values")
            if name in self.cycles:
                return Forcing.from_cycle(self.cycles[name][0])
            return Forcing.from_series(self.series, name, case_file=self.file, key=key)
        if kind == "temperature":
            return Forcing.constant(parse_temperature(value, file=self.file, key=key))
        number = parse_quantity(value, kind, file=self.file, key=key)
        if kind in RANGES and kind != "temperature":
            low, high, shown = RANGES[kind]
            if not low <= number <= high:
                if kind == "fraction":
                    raise CaseError(self.file, key, f"{value!r} is not a fraction from 0 to 1 (a bare number is a fraction; write a percentage with its unit, e.g. '70 %')")
                raise CaseError(self.file, key, f"{value!r} is outside the plausible range {low:g} to {high:g} {shown}")
        return Forcing.constant(number)


_BOUNDARY_KEYS = {
    "film": {"air_temperature"},
    "temperature": {"surface_temperature"},
    "flux": {"heat_flux"},
    "adiabatic": set(),
    "contents": {"contents", "initial_temperature"},
}


def _parse_site(t: _Table) -> Site:
    """``[site]``: where the construction stands, for the sun's position."""
    lat = parse_quantity(t.get("latitude", required=True), "angle", file=t.file, key=t.key("latitude"))
    lon = parse_quantity(t.get("longitude", required=True), "angle", file=t.file, key=t.key("longitude"))
    alt = parse_quantity(t.get("altitude", 0.0), "length", file=t.file, key=t.key("altitude"))
    if not -90 <= lat <= 90:
        raise t.error("latitude", f"must be from -90 to 90 degrees (north positive), got {lat:g}")
    if not -180 <= lon <= 180:
        raise t.error("longitude", f"must be from -180 to 180 degrees (east positive), got {lon:g}")
    t.finish()
    try:
        return Site(latitude=lat, longitude=lon, altitude=alt)
    except ValueError as exc:  # the one place that says what a site may be
        raise t.error("altitude", str(exc)) from None


def _transposed(t: _Table, ctx: _ForcingContext, args: dict, forcing) -> Forcing:
    """The irradiance on the surface from a series of global horizontal irradiance
    (and, when given, direct normal and diffuse horizontal): sun position,
    split and transposition by :func:`layers.solar.surface_irradiance`,
    evaluated once on the series' time stamps."""
    from layers.solar import DEFAULT_LABEL, LABELS, surface_irradiance

    file = ctx.file
    if ctx.site is None:
        raise t.error("solar_irradiance_on", "\"horizontal\" needs a [site] table (latitude, longitude) for the sun's position")
    ghi = args["solar_irradiance"]
    times = ghi.times
    if times is None:
        raise t.error("solar_irradiance", "with solar_irradiance_on = \"horizontal\" it must be a series (\"series:NAME\") of global horizontal irradiance")
    azimuth = parse_quantity(t.get("surface_azimuth", required=True), "angle", file=file, key=t.key("surface_azimuth"))
    if not 0 <= azimuth <= 360:
        raise t.error("surface_azimuth", f"must be from 0 to 360 degrees (0 north, 90 east, 180 south, 270 west), got {azimuth:g}")
    albedo = parse_quantity(t.get("albedo", 0.2), "fraction", file=file, key=t.key("albedo"))
    if not 0 <= albedo <= 1:
        raise t.error("albedo", f"must be a fraction from 0 to 1, got {albedo:g}")
    stamp = t.get("irradiance_stamp", DEFAULT_LABEL)
    if stamp not in LABELS:
        raise t.error("irradiance_stamp", f"must be one of {', '.join(LABELS)} (where in its interval each value is stamped), got {stamp!r}")
    dni = forcing("direct_normal_irradiance", "irradiance")
    dhi = forcing("diffuse_horizontal_irradiance", "irradiance")
    if (dni is None) != (dhi is None):
        raise t.error("diffuse_horizontal_irradiance" if dhi is None else "direct_normal_irradiance",
                      "give direct_normal_irradiance and diffuse_horizontal_irradiance together (or neither: global is split)")
    import warnings as _warnings

    with _warnings.catch_warnings(record=True) as caught:
        _warnings.simplefilter("always")
        try:
            result = surface_irradiance(
                times, ctx.site, args["tilt"], azimuth, ghi(times),
                dni=dni(times) if dni is not None else None, dhi=dhi(times) if dhi is not None else None,
                albedo=albedo, label=stamp,
            )
        except ValueError as exc:
            raise t.error("solar_irradiance", f"cannot be transposed to the surface ({exc})") from None
    for w in caught:
        _warnings.warn(f"{file}: {t.key('solar_irradiance')}: {w.message}", UserWarning, stacklevel=4)
    from layers.solar import SHIFT_WARNING_HOURS, timing_offset

    late = timing_offset(times, ghi(times), result.solar_zenith)
    if late is not None and abs(late) > SHIFT_WARNING_HOURS:
        _warnings.warn(
            f"{file}: {t.key('solar_irradiance')}: the series' irradiance peaks {abs(late):.1f} h "
            f"{'after' if late > 0 else 'before'} the sun's highest point on the median day: are its stamps in "
            "another time zone than they were read in (series.timezone, or offsets in the file)?",
            UserWarning, stacklevel=4)
    args["surface_azimuth"] = float(azimuth)
    args["albedo"] = float(albedo)
    args["irradiance_stamp"] = stamp
    args["solar_split"] = "given direct normal and diffuse horizontal" if dni is not None else "global split (Erbs)"
    return Forcing.from_values(times, result.total, f"irradiance on the surface transposed from {ghi._origin}",
                               case_file=file, key=t.key("solar_irradiance"))


def _tilt_value(raw: Any, file: str, key: str) -> float:
    """A ``tilt`` as written (number of degrees or an angle string) -> [deg], 0 to 180."""
    tilt = parse_quantity(raw, "angle", file=file, key=key) if isinstance(raw, str) else raw
    if isinstance(tilt, bool) or not isinstance(tilt, (int, float)) or not 0 <= tilt <= 180:
        raise CaseError(file, key, f"must be an angle from 0 to 180 degrees, got {tilt!r}")
    return float(tilt)


def _construction_tilt(data: dict, file: str, geometry: str) -> float | None:
    """The tilt of a wall or roof, written in ``[inside]``, ``[outside]`` or both [deg].

    ``tilt`` describes the construction, measured on its outside face as for
    the sun (0 a flat roof, 90 a wall, 180 a floor over a cold space), so one
    value serves both sides: the outside for its sky view and the sun, the
    inside for its ISO 6946 heat-flow direction.  Written on both sides of a
    planar construction, the two must agree.  None when neither gives it.
    """
    found: dict[str, float] = {}
    for side in ("inside", "outside"):
        table = data.get(side)
        if isinstance(table, dict) and "tilt" in table:
            found[side] = _tilt_value(table["tilt"], file, f"{side}.tilt")
    if geometry == "planar" and len(found) == 2 and found["inside"] != found["outside"]:
        raise CaseError(
            file, "inside.tilt",
            f"{found['inside']:g} deg differs from outside.tilt {found['outside']:g} deg: the two faces of a wall or roof "
            "have one tilt (of the outside face: 0 roof, 90 wall, 180 floor over a cold space); give it once",
        )
    return found.get("outside", found.get("inside"))


def _tilt_serves(other: Any) -> bool:
    """Whether the other side's table makes use of the construction's tilt."""
    return isinstance(other, dict) and (other.get("film_coefficient") == "auto" or other.get("solar_irradiance_on") == "horizontal")


def _parse_boundary(value: Any, side: str, geometry: str, ctx: _ForcingContext, orientation: str,
                    construction_tilt: float | None = None, other: Any = None) -> BoundarySpec:
    file = ctx.file
    t = _Table(value, file, side)
    kind = t.get("type", required=True)
    if kind not in BOUNDARY_TYPES:
        raise t.error("type", f"unknown boundary type {kind!r}; use one of {', '.join(BOUNDARY_TYPES)}")
    values: dict[str, Forcing] = {}
    args: dict[str, Any] = {"side": side, "kind": kind, "orientation": orientation}

    def forcing(name: str, qkind: str, required: bool = False) -> Forcing | None:
        raw = t.get(name, required=required)
        if raw is None:
            return None
        f = ctx.forcing(raw, qkind, t.key(name))
        values[name] = f
        return f

    if kind == "film":
        args["air_temperature"] = forcing("air_temperature", "temperature", required=True)
        has_h = t.has("film_coefficient")
        has_r = t.has("surface_resistance")
        if has_h and has_r:
            raise t.error("surface_resistance", "give film_coefficient or surface_resistance, not both")
        h = t.get("film_coefficient")
        r = t.get("surface_resistance")
        if isinstance(h, str) and h.strip() == "auto":
            args["auto_film"] = True
        elif h is not None:
            h_value = _positive(h, "film_coefficient", t, "film_coefficient")
            args["surface_resistance"] = 1.0 / h_value
        elif r is not None:
            args["surface_resistance"] = _positive(r, "areal_resistance", t, "surface_resistance", allow_zero=True)
        elif geometry == "planar":
            # ISO 6946:2017 Table 7 conventional values for a vertical wall
            args["surface_resistance"] = ISO6946_RSI_HORIZONTAL if side == "inside" else ISO6946_RSE
        else:
            raise t.error("film_coefficient", "is required for a cylinder or sphere (a value, or \"auto\")")
        eps = t.get("emissivity", 0.9)
        if isinstance(eps, bool) or not isinstance(eps, (int, float)) or not 0 <= eps <= 1:
            raise t.error("emissivity", f"must be a number from 0 to 1, got {eps!r}")
        args["emissivity"] = float(eps)
        raw_tilt = t.get("tilt")
        if raw_tilt is not None:
            args["tilt"] = _tilt_value(raw_tilt, file, t.key("tilt"))
        elif geometry == "planar" and construction_tilt is not None:
            args["tilt"] = construction_tilt  # written on the other side: one tilt per construction
        else:
            args["tilt"] = 90.0
        if t.has("solar_absorptance") or t.has("solar_irradiance"):
            a = t.get("solar_absorptance", required=True)
            if isinstance(a, bool) or not isinstance(a, (int, float)) or not 0 <= a <= 1:
                raise t.error("solar_absorptance", f"must be a number from 0 to 1, got {a!r}")
            args["solar_absorptance"] = float(a)
            args["solar_irradiance"] = forcing("solar_irradiance", "irradiance", required=True)
            on = t.get("solar_irradiance_on", "surface")
            if on not in ("surface", "horizontal"):
                raise t.error("solar_irradiance_on", f"must be \"surface\" or \"horizontal\", got {on!r}")
            args["solar_irradiance_on"] = on
            if on == "horizontal":
                if geometry != "planar":
                    raise t.error("solar_irradiance_on", "\"horizontal\" transposes to a plane (a wall or a roof); for a pipe or "
                                                         "vessel give the irradiance on its outside surface as the series")
                args["solar_irradiance"] = _transposed(t, ctx, args, forcing)
        if t.has("solar_irradiance_on") and "solar_irradiance" not in args:
            t.get("solar_irradiance_on")
            raise t.error("solar_irradiance_on", "applies with solar_irradiance (and solar_absorptance)")
        for name in ("surface_azimuth", "albedo", "irradiance_stamp", "direct_normal_irradiance", "diffuse_horizontal_irradiance"):
            if t.has(name) and args.get("solar_irradiance_on") != "horizontal":
                t.get(name)
                raise t.error(name, "applies with solar_irradiance and solar_irradiance_on = \"horizontal\"")
        args["wind_speed"] = forcing("wind_speed", "speed")
        args["radiant_temperature"] = forcing("radiant_temperature", "temperature")
        if isinstance(t.data.get("sky_temperature"), str) and t.data["sky_temperature"].strip() == "auto":
            t.get("sky_temperature")
            if not args.get("auto_film"):
                raise t.error("sky_temperature", "\"auto\" (Swinbank clear sky) needs film_coefficient = \"auto\"")
            values["sky_auto"] = True
        else:
            args["sky_temperature"] = forcing("sky_temperature", "temperature")
        if args.get("auto_film") and geometry != "planar" and side == "inside":
            raise t.error("film_coefficient", "\"auto\" is for surfaces in air; give the film coefficient of the fluid in the bore")
        direction = t.get("heat_flow_direction", "auto")
        if direction not in ("auto", "up", "horizontal", "down"):
            raise t.error("heat_flow_direction", f"must be up, horizontal, down or auto (from the tilt and the sign of air minus surface), got {direction!r}")
        args["heat_flow_direction"] = direction
        if t.has("heat_flow_direction") and args.get("auto_film") and (side == "outside" or geometry != "planar"):
            import warnings

            why = ("the outside coefficient of ISO 6946, 4 + 4 v, is driven by the wind and the same for every direction"
                   if geometry == "planar" else "a pipe's or vessel's convection follows from its correlations")
            warnings.warn(f"{file}: {side}: heat_flow_direction not used: {why}", UserWarning, stacklevel=2)
        jacket = t.get("jacket")
        if jacket is not None:
            from layers.radiation import JACKET_EMISSIVITY

            if not isinstance(jacket, str) or jacket not in JACKET_EMISSIVITY:
                raise t.error("jacket", f"unknown jacket {jacket!r}; use one of {', '.join(JACKET_EMISSIVITY)}")
            args["jacket"] = str(jacket)
        if not args.get("auto_film"):
            unused = [name for name in AUTO_ONLY_KEYS if t.has(name)
                      and not (name == "tilt" and (args.get("solar_irradiance_on") == "horizontal"
                                                   or (geometry == "planar" and _tilt_serves(other))))]
            if unused:
                import warnings

                warnings.warn(
                    f"{file}: {side}: {', '.join(unused)} not used with a fixed film coefficient "
                    "(it already includes convection and radiation); use film_coefficient = \"auto\" for them to matter",
                    UserWarning,
                    stacklevel=2,
                )
    elif kind == "temperature":
        args["surface_temperature"] = forcing("surface_temperature", "temperature", required=True)
    elif kind == "flux":
        args["heat_flux"] = forcing("heat_flux", "heat_flux", required=True)
    elif kind == "contents":
        contents = t.get("contents", "water")
        if contents != "water":
            raise t.error("contents", f"only 'water' is modelled, got {contents!r}")
        args["contents"] = contents
        if t.has("film_coefficient"):
            args["surface_resistance"] = 1.0 / _positive(t.get("film_coefficient"), "film_coefficient", t, "film_coefficient")
        args["initial_temperature"] = parse_temperature(
            t.get("initial_temperature", required=True), file=file, key=t.key("initial_temperature")
        )
    rh = t.get("relative_humidity")
    if rh is not None:
        args["relative_humidity"] = forcing("relative_humidity", "fraction")
        if isinstance(rh, (int, float, str)) and not str(rh).startswith("series:"):
            v = parse_quantity(rh, "fraction", file=file, key=t.key("relative_humidity"))
            if not 0 < v <= 1:
                raise t.error("relative_humidity", f"must be between 0 and 100 %, got {rh!r}")
    for other_kind, keys in _BOUNDARY_KEYS.items():
        if other_kind == kind:
            continue
        for key in keys - _BOUNDARY_KEYS[kind]:
            if t.has(key):
                raise t.error(key, f"does not apply to a boundary of type {kind!r}")
    t.finish()
    args["values"] = values
    return BoundarySpec(**args)


def _parse_datetime(value: Any, file: str, key: str, timezone: str) -> np.datetime64:
    if isinstance(value, dt.datetime):
        stamp = value
    elif isinstance(value, dt.date):
        stamp = dt.datetime(value.year, value.month, value.day)
    elif isinstance(value, str):
        try:
            stamp = dt.datetime.fromisoformat(value.strip())
        except ValueError:
            raise CaseError(file, key, f"cannot read {value!r} as an ISO 8601 date and time") from None
    else:
        raise CaseError(file, key, f"expected an ISO 8601 date and time, got {value!r}")
    if stamp.tzinfo is None:
        return Clock(timezone, file=file, key="series.timezone").localize(stamp, (file, key))
    utc = stamp.astimezone(dt.timezone.utc).replace(tzinfo=None)
    return Clock("UTC", file=file, key=key).localize(utc, (file, key))


def _written_offset(value: Any) -> str | None:
    """The UTC offset a case-file time is written with (``+01:00``, ``Z``), None
    when it has none, ``""`` when it cannot be read (refused elsewhere)."""
    if isinstance(value, str):
        try:
            value = dt.datetime.fromisoformat(value.strip())
        except ValueError:
            return ""
    if isinstance(value, dt.datetime):
        offset = value.utcoffset()
        if offset is None:
            return None
        minutes = int(offset.total_seconds()) // 60
        if minutes == 0:
            return "Z"
        return f"{'+' if minutes > 0 else '-'}{abs(minutes) // 60:02d}:{abs(minutes) % 60:02d}"
    return None if isinstance(value, dt.date) else ""


def _time_zones(data: dict, file: str, series: Series | None, cycles: dict, timezone: str) -> dict[str, str]:
    """Which zone each time of the case is read in, refusing an ambiguous mix.

    Rules (``docs/case-file.md``, "Time zones"): an explicit offset always
    wins; a time without one (in the series file, ``[time] start`` and
    ``end``, ``[sizing] design_time``) is read in ``series.timezone``; with
    no zone declared it is read as UTC, and said so.  When no zone is
    declared and naive times meet times with explicit offsets (netCDF CF
    times count as explicit UTC), the naive ones' zone would be a guess:
    refused, naming the first naive key.  ``peak_hour`` of a generated cycle
    is a clock reading in ``series.timezone`` (UTC when none is declared);
    it is reported, not refused.

    Returns
    -------
    dict
        Key as the case file writes it -> how its time was read.
    """
    table = data.get("series") if isinstance(data.get("series"), dict) else {}
    declared = "timezone" in table
    naive_zone = f"read in {timezone} (series.timezone)" if declared else "read as UTC (no series.timezone declared)"
    zones: dict[str, str] = {}
    naive: list[str] = []
    explicit: list[tuple[str, str]] = []
    if series is not None:
        key = f"series.file ({base_name(series.file)})"
        if series.time_form == "naive":
            zones[key] = f"stamps without offsets, {naive_zone}"
            naive.append("series.file")
        elif series.time_form == "cf":
            zones[key] = "netCDF CF times (UTC)"
            explicit.append(("series.file", "Z"))
        else:
            offsets = series.time_form.split(" ", 1)[1]
            zones[key] = f"stamps with their own UTC offsets ({offsets})"
            explicit.append(("series.file", offsets.split(", ")[0]))
    for table_name, name in (("time", "start"), ("time", "end"), ("sizing", "design_time")):
        section = data.get(table_name)
        key = f"{table_name}.{name}"
        if not isinstance(section, dict) or name not in section:
            if key == "time.start":
                zones[key] = ("not given: the series' first stamp" if series is not None
                              else f"not given: the default {DEFAULT_START} UTC")
            continue
        offset = _written_offset(section[name])
        if offset == "":
            continue
        if offset is None:
            zones[key] = f"written without an offset, {naive_zone}"
            naive.append(key)
        else:
            zones[key] = f"written with offset {offset}"
            explicit.append((key, offset))
    if cycles:
        clock = Clock(timezone, file=file, key="series.timezone")
        zones["series.cycles peak_hour"] = (
            f"on the clock of {timezone} (series.timezone{', at its standard offset all year' if clock.zone is not None else ''})"
            if declared else "on the UTC clock (no series.timezone declared)")
    if not declared and naive and explicit:
        key, (other, offset) = naive[0], explicit[0]
        what = "the stamps of the series file have" if key == "series.file" else "is written with"
        their = "the series file's stamps carry" if other == "series.file" else f"{other} carries"
        raise CaseError(
            file, key,
            f"{what} no UTC offset while {their} one ({offset}) and no series.timezone is declared, so the zone "
            f"of the naive {'stamps' if key == 'series.file' else 'time'} would be a guess: "
            f"{'declare series.timezone' if key == 'series.file' else 'write it with an offset, or declare series.timezone'} "
            "(the zone of every time written without an offset)",
        )
    return zones


def _parse_time(t: _Table, series: Series | None, timezone: str) -> TimePlan:
    file = t.file
    start_zone = f"the start of the series ({timezone})" if series is not None else "the default start (UTC)"
    if t.has("start"):
        start = _parse_datetime(t.get("start"), file, t.key("start"), timezone)
        written = t.data["start"]
        naive = not (isinstance(written, dt.datetime) and written.tzinfo is not None) and not (
            isinstance(written, str) and re.search(r"(Z|[+-]\d\d:?\d\d)\s*$", written.strip()))
        start_zone = (f"written without an offset: read in the series' time zone {timezone}" if naive and series is not None
                      else "written without an offset: read as UTC" if naive else "written with its own offset")
    elif series is not None:
        start = series.time[0].astype("datetime64[s]")
    else:
        start = _parse_datetime(DEFAULT_START, file, t.key("start"), "UTC")
    if t.has("duration") and t.has("end"):
        raise t.error("end", "give duration or end, not both")
    if t.has("end"):
        end = _parse_datetime(t.get("end"), file, t.key("end"), timezone)
        duration = float((end - start) / np.timedelta64(1, "s"))
        if duration <= 0:
            raise t.error("end", "must be after the start")
    elif t.has("duration"):
        duration = _positive(t.get("duration"), "duration", t, "duration")
    elif series is not None:
        duration = float((series.time[-1] - start) / np.timedelta64(1, "s"))
        if duration <= 0:
            raise t.error("start", "is at or after the end of the series")
    else:
        raise t.error("duration", "is required (or end, or a series file to run through)")
    step = _positive(t.get("step", "10 min"), "duration", t, "step")
    if step > duration:
        raise t.error("step", "is longer than the run")
    n = duration / step
    if abs(n - round(n)) > 1e-6 * n:
        raise t.error("step", f"must divide the duration ({duration:g} s) into whole steps")
    output = _positive(t.get("output_every", step if step >= 3600 else "1 h"), "duration", t, "output_every")
    ratio = output / step
    if ratio < 1 - 1e-9 or abs(ratio - round(ratio)) > 1e-6 * ratio:
        raise t.error("output_every", "must be a whole multiple of the step")
    initial = t.get("initial", "steady")
    if isinstance(initial, str) and initial.strip() in INITIAL_WORDS:
        initial_value: float | str = initial.strip()
    elif isinstance(initial, str) and not re.match(r"\s*[-+]?[\d.]", initial):
        raise t.error("initial", f"must be a temperature, \"steady\" or \"periodic\"; got {initial!r}")
    else:
        initial_value = parse_temperature(initial, file=file, key=t.key("initial"))
    from layers.schemes import SCHEME_NAMES

    scheme = t.get("scheme", "auto")
    if scheme not in SCHEME_NAMES:
        raise t.error("scheme", f"unknown scheme {scheme!r}; use one of {', '.join(SCHEME_NAMES)}")
    period = _positive(t.get("period", "24 h"), "duration", t, "period")
    keep = t.get("keep_temperature", None)
    if keep is not None and not isinstance(keep, bool):
        raise t.error("keep_temperature", "must be true or false")
    if initial_value == "periodic":
        p = period / step
        if abs(p - round(p)) > 1e-6 * p:
            raise t.error("period", "must be a whole number of steps")
    t.finish()
    return TimePlan(
        start=start,
        duration=duration,
        step=step,
        output_every=output,
        initial=initial_value,
        scheme=scheme,
        period=period,
        keep_temperature=keep,
        start_zone=start_zone,
    )


def _parse_sizing(
    t: _Table, layers, geometry: str, inside: BoundarySpec, outside: BoundarySpec, time: TimePlan, timezone: str,
    vapour_layers: tuple[VapourLayer, ...] = (),
) -> SizingSpec:
    file = t.file
    layer = t.get("layer", required=True)
    listed = len(vapour_layers) or len(layers)  # the case file's numbering counts membranes too
    if isinstance(layer, bool) or not isinstance(layer, int) or not 1 <= layer <= listed:
        raise t.error("layer", f"must be a layer number from 1 to {listed}, got {layer!r}")
    if vapour_layers:
        named = vapour_layers[layer - 1]
        if named.thermal_index is None:
            raise t.error("layer", f"names a membrane ({named.name}), which has no thermal thickness to size")
        layer = named.thermal_index  # from here on: the position among the thermal layers
    if layers[layer - 1].is_gap:
        raise t.error("layer", "names an air gap, which has no thickness to size")
    raw = t.get("thicknesses", required=True)
    if isinstance(raw, dict):
        r = _Table(raw, file, "sizing.thicknesses")
        lo = _positive(r.get("from", required=True), "length", r, "from")
        hi = _positive(r.get("to", required=True), "length", r, "to")
        st = _positive(r.get("step", required=True), "length", r, "step")
        r.finish()
        if hi < lo:
            raise t.error("thicknesses", "'to' is smaller than 'from'")
        count = int(math.floor((hi - lo) / st + 1e-9)) + 1
        if count > 10000:
            raise t.error("thicknesses", f"{count} candidates is too many (at most 10000)")
        values = tuple(float(v) for v in lo + st * np.arange(count))
    elif isinstance(raw, list) and raw:
        values = tuple(
            _positive(v, "length", t, f"thicknesses[{i + 1}]") for i, v in enumerate(raw)
        )
        for i, (v, given) in enumerate(zip(values, raw)):
            if isinstance(given, (int, float)) and not isinstance(given, bool) and v >= BARE_LENGTH_LIMIT:
                raise t.error(f"thicknesses[{i + 1}]", f"{given!r} as a bare number is {v:g} m; did you mean \"{given} mm\"?")
        if any(b <= a for a, b in zip(values, values[1:])):
            raise t.error("thicknesses", "must be in increasing order")
    else:
        raise t.error("thicknesses", "must be a list of thicknesses or {from, to, step}")
    heat_kind = {"planar": "heat_flux", "cylinder": "linear_heat_flow"}.get(geometry)
    out: dict[str, Any] = {"layer": layer, "thicknesses": values, "case_layer": int(t.get("layer"))}
    if t.has("max_surface_temperature"):
        out["max_surface_temperature"] = parse_temperature(t.get("max_surface_temperature"), file=file, key=t.key("max_surface_temperature"))
    if t.has("dew_point_margin"):
        out["dew_point_margin"] = parse_quantity(t.get("dew_point_margin"), "temperature_difference", file=file, key=t.key("dew_point_margin"))
        if outside.relative_humidity is None:
            raise t.error("dew_point_margin", "needs outside.relative_humidity")
    if t.has("max_heat_loss"):
        if heat_kind is None:
            value = t.get("max_heat_loss")
            from layers.units import ureg

            try:
                out["max_heat_loss"] = float(ureg.Quantity(value).to("W").magnitude) if isinstance(value, str) else float(value)
            except Exception:
                raise t.error("max_heat_loss", f"must be a power in W for a sphere, got {value!r}") from None
        else:
            out["max_heat_loss"] = _positive(t.get("max_heat_loss"), heat_kind, t, "max_heat_loss")
    if t.has("min_freeze_time"):
        if inside.kind != "contents":
            raise t.error("min_freeze_time", "needs inside.type = \"contents\"")
        out["min_freeze_time"] = _positive(t.get("min_freeze_time"), "duration", t, "min_freeze_time")
    if t.has("max_ice_fraction"):
        f = parse_quantity(t.get("max_ice_fraction"), "fraction", file=file, key=t.key("max_ice_fraction"))
        if not 0 < f <= 1:
            raise t.error("max_ice_fraction", "must be between 0 and 1")
        out["max_ice_fraction"] = f
    if t.has("design_time"):
        when = _parse_datetime(t.get("design_time"), file, t.key("design_time"), timezone)
        end = time.start + np.timedelta64(int(round(time.duration)), "s")
        if not time.start <= when <= end:
            raise t.error("design_time", f"must lie within the run ({_iso(time.start)} to {_iso(end)}), got {_iso(when)}")
        out["design_time"] = when
    t.finish()
    if not any(k in out for k in ("max_surface_temperature", "dew_point_margin", "max_heat_loss", "min_freeze_time")):
        raise CaseError(file, "sizing", "names no criterion (max_surface_temperature, dew_point_margin, max_heat_loss or min_freeze_time)")
    return SizingSpec(**out)
