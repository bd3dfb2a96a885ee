"""The calculation report for a client: ``layers report RUN.nc [...] [-o OUT.html]``.

One self-contained HTML page (figures inline as base64 PNG, styles inline,
A4 print styles, no network resource of any kind) for each result file
given: a run, a sizing, a periodic (ISO 13786) result, a sweep or a
condensation check (ISO 13788), and, for several files, a comparison.

What the page says comes from the files themselves: their variables, their
attributes and the case text they carry.  The case text is read again with
the case reader (:func:`layers.provenance.load_archived_case`, which uses
:func:`layers.case.parse_case`) only to *describe* the inputs (layer
properties and their sources, boundaries); nothing is run again.  When the
case text does not read (an older file, a series that is not at hand), the
page says so and describes what the dataset itself holds.

The wording and figures are those of the rest of the tool: the run and sweep
summaries and cautions of :mod:`layers.report`, the sizing cautions of
:mod:`layers.sizing`, the comparison metrics of :mod:`layers.comparison`,
the figure kinds of :mod:`layers.plots`.  Everything read from a file
(titles, labels, names, the case text) is untrusted and is escaped by the
template engine (Jinja2 with autoescaping on).

Library code: returns text and paths, raises :class:`CaseError` for bad
input, never prints.
"""

from __future__ import annotations

import base64
import calendar
import io
import math
import os
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from types import SimpleNamespace
from typing import TYPE_CHECKING, Any, NamedTuple

import numpy as np

from layers.about import CAUTION, __version__
from layers.errors import CaseError

if TYPE_CHECKING:
    from collections.abc import Sequence

    import xarray as xr

    from layers.case import Case

#: Suffixes ``-o`` accepts.
SUFFIXES = (".html", ".htm")
#: The result kinds a report describes.
KINDS = ("run", "sizing", "periodic", "sweep", "condensation")
#: Resolution of the figures embedded in the page [dots per inch]: sharp on
#: paper at the width of an A4 text column, about 150-250 kB per figure.
FIGURE_DPI = 110
#: A comparison names the differing case keys (and each run's values of them) up to this many.
COMPARISON_KEYS = 8
#: A sizing table lists every candidate up to this many (all are in the file).
SIZING_ROWS = 40

#: Variables without which a file of each kind cannot be described.
_REQUIRED = {
    "run": ("time", "surface_temperature_outside", "heat_flow_inside"),
    "sweep": ("time", "surface_temperature_outside", "heat_flow_inside"),
    "sizing": ("thickness", "passes_all"),
    "periodic": ("thermal_transmittance", "periodic_transmittance", "decrement_factor"),
    "condensation": ("month", "interface", "condensation_rate", "accumulated_moisture"),
}

_KIND_LABELS = {
    "run": "transient run",
    "sizing": "insulation sizing",
    "periodic": "dynamic thermal characteristics (ISO 13786)",
    "sweep": "parameter sweep",
    "condensation": "interstitial condensation check (ISO 13788)",
}

#: Variables holding the boundary conditions of a run (prefixes): the climate or
#: process series the report summarises.
_BOUNDARY_SERIES = (
    "air_temperature_", "sol_air_temperature_", "solar_irradiance_", "dew_point_", "relative_humidity_",
    "wind_speed_", "sky_temperature_", "radiant_temperature_", "heat_flux_", "surface_temperature_imposed_",
    "vapour_pressure_inside", "vapour_pressure_outside",
)

_SCHEME_TEXT = {
    "exact": "exact integration of the linear system through its eigenmodes (an exponential integrator: "
             "no time-discretisation error for forcing linear between steps)",
    "tr-bdf2": "TR-BDF2, second order, L-stable (Bank et al., IEEE Trans. Electron Devices 32, 1985; "
               "Hosea & Shampine, Appl. Numer. Math. 20, 1996)",
    "backward-euler": "backward Euler, first order, L-stable",
    "crank-nicolson": "Crank-Nicolson, second order, with backward-Euler half steps after jumps "
                      "(Rannacher, Numer. Math. 43, 1984)",
}

_CRITERIA = {
    "max_surface_temperature": "touch limit (outside surface)",
    "dew_point_margin": "dew point margin (outside surface)",
    "max_heat_loss": "heat-loss budget",
    "min_freeze_time": "freeze time",
    "service_temperature": "maximum service temperature of the materials",
}

_SHORT_CRITERIA = {
    "max_surface_temperature": "touch limit",
    "dew_point_margin": "dew point",
    "max_heat_loss": "heat loss",
    "min_freeze_time": "freeze time",
    "service_temperature": "service temp.",
}

_CONDENSATION_CAUTION = (
    "The monthly method of ISO 13788 considers vapour diffusion only, with steady monthly mean conditions: "
    "air leakage, rain, built-in moisture, liquid transport and the moisture storage of materials are left out. "
    "Its result is an assessment of risk, not a prediction of moisture contents."
)

_VERDICT_CLASS = {"no condensation": "pass", "dries out within the year": "note", "accumulates": "fail"}


# --------------------------------------------------------------------------- #
# what the template receives


class Cell(NamedTuple):
    """One table cell: its text, a style class ("", "pass", "fail", "note", "num", "sub")
    and how many columns it spans."""

    text: str
    cls: str = ""
    span: int = 1


@dataclass
class Table:
    caption: str
    head: list[str]
    rows: list[list[Cell]]
    note: str = ""
    wide: bool = False


@dataclass
class Figure:
    caption: str
    data: str          # base64 PNG
    alt: str


@dataclass
class Section:
    """Everything the page shows of one result file."""

    anchor: str
    file_name: str
    kind: str
    kind_label: str
    title: str
    job: str
    case_note: str = ""
    facts: list[tuple[str, str]] = field(default_factory=list)
    inputs: list[Table] = field(default_factory=list)
    input_notes: list[str] = field(default_factory=list)
    boundaries: list[tuple[str, str]] = field(default_factory=list)
    method: list[str] = field(default_factory=list)
    references: list[str] = field(default_factory=list)
    key_figures: Table | None = None
    verdict: Cell | None = None
    results: list[Table] = field(default_factory=list)
    summary: str = ""
    summary_heading: str = ""
    figures: list[Figure] = field(default_factory=list)
    cautions: list[str] = field(default_factory=list)
    provenance: list[tuple[str, str]] = field(default_factory=list)
    case_text: str = ""
    headline: list[tuple[str, str]] = field(default_factory=list)


@dataclass
class Result:
    """One result file, opened."""

    path: Path
    name: str
    ds: xr.Dataset
    kind: str
    case: Case | None
    case_note: str


class Written(NamedTuple):
    """What :func:`write_report` wrote and the cautions the command prints."""

    path: Path
    cautions: list[str]


# --------------------------------------------------------------------------- #
# opening and telling kinds apart


def result_kind(ds: xr.Dataset, file: str) -> str:
    """The kind of a result Dataset: one of :data:`KINDS`.

    The ``product`` attribute decides where it is one of ours; files without
    it (or with another) are told by the variables only that kind has.

    Raises
    ------
    CaseError
        A comparison Dataset (``layers compare -o X.nc``) or a file of no known kind.
    """
    product = str(ds.attrs.get("product", "")).strip().lower()
    if product == "comparison" or "run" in ds.dims:
        raise CaseError(file, "(file)", "is a comparison of runs (layers compare -o); report the runs themselves: "
                                         "layers report RUN_A.nc RUN_B.nc")
    if product in KINDS:
        return product
    names = set(ds.variables)
    if {"condensation_rate", "accumulated_moisture"} <= names or ("month" in ds.dims and "verdict" in ds.attrs):
        return "condensation"
    if "passes_all" in names or ("thickness" in ds.dims and any(str(v).startswith("passes_") for v in names)):
        return "sizing"
    if "periodic_transmittance" in names and "decrement_factor" in names:
        return "periodic"
    if "sweep_points" in ds.attrs or "sweep_dimensions" in ds.attrs:
        return "sweep"
    if {"time", "surface_temperature_outside", "heat_flow_inside"} <= names:
        return "run"
    raise CaseError(file, "(file)", "is not a layers result (run, sizing, periodic, sweep or condensation) that a report can describe")


def open_result(path: str | os.PathLike, series_dirs: Sequence[Path] = ()) -> Result:
    """Open one result file fully into memory and tell its kind (``series_dirs``:
    further folders to look in for the series of its case, to describe the inputs).

    Raises
    ------
    CaseError
        A missing file, one that is not netCDF, or one of no known kind.
    """
    from layers.results import read_netcdf

    path = Path(path)
    ds = read_netcdf(path)
    kind = result_kind(ds, str(path))
    present = set(ds.variables) | set(ds.dims)
    for name in _REQUIRED[kind]:
        if name not in present:
            raise CaseError(str(path), name, f"is missing: not a complete {_KIND_LABELS[kind]} result (a damaged or foreign file)")
    if kind in ("run", "sweep"):
        for name in ("surface_temperature_outside", "heat_flow_inside"):
            if not np.isfinite(ds[name].values).any():
                raise CaseError(str(path), name, "holds no finite value (a damaged or foreign file)")
    case, note = _read_case(ds, path, tuple(Path(d) for d in series_dirs))
    return Result(path, path.name, ds, kind, case, note)


def _read_case(ds: xr.Dataset, path: Path, series_dirs: tuple[Path, ...] = ()) -> tuple[Case | None, str]:
    """The case the file carries, read to describe the inputs, or None and why not.

    The case text is written to a private folder under a plain name and read
    by the case reader (the series, if any, from the copy embedded in the
    file or an unchanged copy beside it, checked by its SHA-256); nothing
    is run.
    """
    text = ds.attrs.get("case")
    if not isinstance(text, str) or not text.strip():
        return None, "The file holds no case text; the inputs shown are those the dataset itself records."
    from layers.provenance import load_archived_case

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            case = load_archived_case(path, series_dirs)
    except CaseError as exc:
        return None, (f"The case text in the file could not be read again here ({exc.key}: {exc.reason}); "
                      "the inputs shown are those the dataset itself records, and the case text is reproduced in full below.")
    except Exception as exc:  # noqa: BLE001 - a file of an older or newer version: describe what it holds
        return None, (f"The case text in the file could not be read again by this version ({type(exc).__name__}); "
                      "the inputs shown are those the dataset itself records, and the case text is reproduced in full below.")
    return case, ""


# --------------------------------------------------------------------------- #
# formatting helpers


def _units(text: Any) -> str:
    from layers.plots import pretty_units

    return pretty_units(str(text or ""))


def _num(value: Any, spec: str = ".4g") -> str:
    try:
        v = float(value)
    except (TypeError, ValueError):
        return str(value)
    if not math.isfinite(v):
        return "–"
    text = format(v, spec)
    return text.replace("-", "−") if text.startswith("-") else text


def _temp(value: Any) -> str:
    """A temperature as the report writes it: two decimals and °C."""
    return f"{_num(value, '.2f')} °C"


def _with_units(value: Any, units: Any, spec: str = ".4g") -> str:
    u = _units(units)
    return _num(value, spec) + ("" if u in ("-", "") else f" {u}")


def _utc(value: Any) -> str:
    from layers.formatting import format_utc

    return format_utc(value).replace("T", " ").replace(":00Z", " UTC")


def _duration(seconds: float) -> str:
    from layers.formatting import format_duration

    return format_duration(float(seconds), approximate=True)


def _cells(*texts: Any) -> list[Cell]:
    return [t if isinstance(t, Cell) else Cell(str(t)) for t in texts]


def _figure(ds: xr.Dataset, kind: str, caption: str, **options: Any) -> Figure | None:
    """A figure of :mod:`layers.plots` as an inline PNG, or None where the data do not allow it."""
    from layers.plots import plot

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            fig = plot(ds, kind, **options)
            buffer = io.BytesIO()
            fig.savefig(buffer, format="png", dpi=FIGURE_DPI)
    except (CaseError, ValueError, KeyError, IndexError, TypeError):
        return None
    return Figure(caption, base64.b64encode(buffer.getvalue()).decode("ascii"), caption)


def _dedupe(lines: Sequence[str]) -> list[str]:
    """The lines in order, each once; a line made up only of other lines (a
    dataset's ``caution`` joins the cautions the command printed) is left out."""
    out: list[str] = []
    for line in lines:
        line = " ".join(str(line).split())
        if line and line not in out:
            out.append(line)
    kept = []
    for line in out:
        rest = line
        for other in out:
            if other != line and other in rest:
                rest = rest.replace(other, "")
        if rest.strip() or rest == line:
            kept.append(line)
    return kept


def _stand_in(ds: xr.Dataset) -> SimpleNamespace:
    """What the caution functions of :mod:`layers.report` and :mod:`layers.sizing`
    ask of a case, from the dataset alone (when its case text does not read)."""
    def attr(name: str) -> float | None:
        return float(ds.attrs[name]) if name in ds.attrs else None

    sizing = SimpleNamespace(
        max_surface_temperature=attr("max_surface_temperature") if "passes_max_surface_temperature" in ds else None,
        dew_point_margin=attr("dew_point_margin") if "passes_dew_point_margin" in ds else None,
        min_freeze_time=attr("min_freeze_time_h") if "passes_min_freeze_time" in ds else None,
        layer=int(ds.attrs.get("sized_layer", 0) or 0),
    )
    contents = "contents_temperature" in ds or "freeze_time" in ds
    return SimpleNamespace(geometry=str(ds.attrs.get("geometry", "planar")),
                           inside=SimpleNamespace(kind="contents" if contents else "film"), sizing=sizing)


# --------------------------------------------------------------------------- #
# inputs


def _layer_tables(result: Result) -> list[Table]:
    """The layers: from the case where it reads, else from the dataset's coordinates."""
    case = result.case
    if case is not None:
        rows, sources = [], []
        for number, spec in enumerate(case.layers, start=1):
            name = spec.name or (spec.material.name if spec.material is not None else "air gap")
            if spec.is_gap:
                rows.append(_cells(number, name, "air gap", Cell(_num(spec.thickness * 1000, ".1f"), "num"),
                                   Cell(f"R = {_num(spec.resistance, '.3g')} m²·K/W", "num"), "–", "–"))
                continue
            m = spec.material
            k = _num(m.conductivity, ".4g") + ("" if m.is_constant else "*")
            rows.append(_cells(number, name, m.name, Cell(_num(spec.thickness * 1000, ".1f"), "num"), Cell(k, "num"),
                               Cell(_num(m.density, ".0f"), "num"), Cell(_num(m.specific_heat, ".0f"), "num")))
            if spec.contact_resistance:
                rows.append(_cells("", Cell(f"contact resistance to the next layer: {_num(spec.contact_resistance, '.3g')} m²·K/W",
                                            "sub", 6)))
            source = m.source or ("defined in the case file" if m.name in case.materials else "not recorded")
            if (m.name, source) not in sources:
                sources.append((m.name, source))
        note = "* temperature-dependent conductivity: the value shown is at 10 °C." if any(
            sp.material is not None and not sp.material.is_constant for sp in case.layers) else ""
        return [Table("Layers, from the inside surface to the outside surface",
                      ["#", "layer", "material", "thickness [mm]", "k [W/(m·K)]", "ρ [kg/m³]", "c [J/(kg·K)]"], rows, note=note),
                Table("Sources of the material properties", ["material", "source"], [_cells(n, src) for n, src in sources], wide=True)]
    ds = result.ds
    if "layer" in ds.coords and "material" in ds.coords and "layer_interface" in ds.coords and ds["layer_interface"].ndim == 1:
        faces = ds["layer_interface"].values
        rows = []
        numbers = ds["layer"].values
        materials = ds["material"].values
        for number in range(1, faces.size):
            cells = np.flatnonzero(numbers == number)
            material = str(materials[cells[0]]) if cells.size else "air gap"
            rows.append(_cells(number, material, Cell(_num((faces[number] - faces[number - 1]) * 1000, ".1f"), "num")))
        return [Table("Layers, from the inside surface to the outside surface (as the dataset records them)",
                      ["#", "material", "thickness [mm]"], rows)]
    return []


def _boundaries(case: Case | None) -> list[tuple[str, str]]:
    if case is None:
        return []
    from layers.report import _describe_boundary

    return [(spec.side, _describe_boundary(spec)) for spec in (case.inside, case.outside)]


def _series_table(ds: xr.Dataset) -> Table | None:
    """Minimum, mean and maximum of each boundary series the dataset holds (the
    climate or process): over time for a run, over the months for a condensation check."""
    axis = "time" if "time" in ds.dims else "month" if "month" in ds.dims else None
    if axis is None:
        return None
    rows = []
    seconds = None
    if axis == "time":
        seconds = (ds["time"].values - ds["time"].values[0]) / np.timedelta64(1, "s")
    for name in ds.data_vars:
        da = ds[name]
        if axis not in da.dims or "interface" in da.dims or not name.startswith(_BOUNDARY_SERIES):
            continue
        values = np.asarray(da.values, dtype=float)
        if not np.isfinite(values).any():
            continue
        if da.ndim == 1 and seconds is not None and seconds[-1] > 0 and np.isfinite(values).all():
            mean = float(np.trapezoid(values, seconds) / seconds[-1])
        else:
            mean = float(np.nanmean(values))
        units = da.attrs.get("units", "")
        if units == "1" and name.startswith("relative_humidity_"):
            values, mean, units = values * 100.0, mean * 100.0, "%"
        rows.append(_cells(str(da.attrs.get("long_name", name)), Cell(_with_units(np.nanmin(values), units, ".4g"), "num"),
                           Cell(_with_units(mean, units, ".4g"), "num"), Cell(_with_units(np.nanmax(values), units, ".4g"), "num")))
    if not rows:
        return None
    if axis == "month":
        return Table("Monthly mean climate", ["series", "lowest month", "mean of the months", "highest month"], rows)
    span = f" from {_utc(ds['time'].values[0])} to {_utc(ds['time'].values[-1])}" if seconds is not None and seconds.size else ""
    return Table(f"Boundary conditions over the run{span}", ["series", "minimum", "mean over time", "maximum"], rows,
                 note="Values at the kept time stamps of the result; the mean is over time (trapezoidal).")


def _inputs(result: Result, section: Section) -> None:
    section.inputs.extend(_layer_tables(result))
    case = result.case
    if case is not None:
        from layers.report import design_resistance

        geometry = case.geometry + (f", inside radius {_num(case.inner_radius * 1000, '.4g')} mm" if case.geometry != "planar" else "")
        section.facts.append(("geometry", geometry))
        section.boundaries = _boundaries(case)
        if case.geometry == "planar" and all(sp.kind in ("film", "temperature") for sp in (case.inside, case.outside)):
            r_si, r_cond, r_se = design_resistance(case, case.mesh())
            total = r_si + r_cond + r_se
            section.facts.append(("thermal transmittance U (ISO 6946)",
                                  f"{_num(1 / total, '.4g')} W/(m²·K)  (R_si {_num(r_si, '.3g')} + R {_num(r_cond, '.4g')} "
                                  f"+ R_se {_num(r_se, '.3g')} = {_num(total, '.4g')} m²·K/W)"))
        if case.series is not None:
            section.facts.append(("series file", f"{Path(case.series.file).name} ({len(case.series.time)} rows)"))
        if case.sweep:
            for d in case.sweep:
                section.input_notes.append(f"Swept: {d.name} = {d.key}, {len(d.values)} values from {d.values[0]} to {d.values[-1]}.")
        if case.sizing is not None and result.kind == "sizing":
            spec = case.layers[case.sizing.layer - 1]
            section.input_notes.append(
                f"The thickness of layer {case.sizing.listed} ({spec.name or spec.material.name}) is varied over the candidates "
                f"below; the layer table shows the thickness written in the case.")
    else:
        if result.ds.attrs.get("geometry"):
            section.facts.append(("geometry", str(result.ds.attrs["geometry"])))
        if result.ds.attrs.get("series_file"):
            section.facts.append(("series file", str(result.ds.attrs["series_file"])))
    series = _series_table(result.ds)
    if series is not None:
        section.inputs.append(series)


# --------------------------------------------------------------------------- #
# one builder per kind


def _common(result: Result, anchor: str) -> Section:
    ds = result.ds
    title = str(ds.attrs.get("title", "") or "(untitled)")
    return Section(anchor=anchor, file_name=result.name, kind=result.kind, kind_label=_KIND_LABELS[result.kind],
                   title=title, job="", case_note=result.case_note, case_text=str(ds.attrs.get("case", "")))


def _provenance(result: Result, section: Section) -> None:
    a = result.ds.attrs
    rows = [("result file", result.name), ("kind", _KIND_LABELS[result.kind])]
    for key, label in (("software_version", "software version"), ("created", "result created (UTC)"),
                       ("case_file", "case file"), ("case_sha256", "case SHA-256"), ("label", "label"),
                       ("series_file", "series file"), ("series_sha256", "series SHA-256"),
                       ("rerun_of", "re-run of"), ("case_path", "case path (recorded by the user)"),
                       ("series_path", "series path (recorded by the user)")):
        if a.get(key) not in (None, ""):
            rows.append((label, str(a[key])))
    section.provenance = rows


def _method_run(ds: xr.Dataset, case: Case | None) -> list[str]:
    a = ds.attrs
    scheme = str(a.get("scheme", "?"))
    lines = [f"Transient one-dimensional heat conduction by finite volumes ({a.get('source', 'layers')}): "
             + (f"{a['cells']} cells, " if "cells" in a else "") + f"{a.get('geometry', '?')} geometry."]
    line = f"Time scheme: {_SCHEME_TEXT.get(scheme, scheme)}"
    if a.get("scheme_requested") == "auto":
        line += " (chosen automatically: " + (
            "the case is linear)" if scheme == "exact" else f"the case is nonlinear{_nonlinear_because(case)}, so it steps)")
    if "time_step" in a:
        line += f"; time step {_duration(float(a['time_step']))}"
    lines.append(line + ".")
    if "output_every" in a:
        lines.append(f"Results kept every {_duration(float(a['output_every']))}; each value is instantaneous at its time stamp.")
    initial = str(a.get("initial", ""))
    if initial == "periodic":
        lines.append(f"Initial state: the periodic state of the first period, reached after {a.get('periodic_cycles', '?')} cycles.")
    elif initial == "steady":
        lines.append("Initial state: the steady state at the start's boundary values.")
    elif initial:
        lines.append(f"Initial state: a uniform {_num(initial, '.4g')} °C.")
    if "energy_balance_error" in a:
        lines.append(f"Energy balance over the run (heat in, heat out, heat stored): relative error {float(a['energy_balance_error']):.1e}.")
    if "nonlinear_unconverged_steps" in a:
        lines.append(f"Temperature-dependent properties or films: chord iteration to {float(a.get('nonlinear_tolerance_K', 1e-6)):g} K, "
                     f"{a['nonlinear_unconverged_steps']} steps not converged.")
    if case is not None:
        lines += _film_lines(case)
    if any(str(v).startswith("sol_air_temperature_") for v in ds.data_vars) and (
            case is None or any(sp.kind == "film" and not sp.auto_film and sp.solar_irradiance is not None for sp in (case.inside, case.outside))):
        lines.append("Sun on a fixed film: sol-air temperature θ_air + a·I·R_s (ASHRAE Handbook of Fundamentals 2017, ch. 18).")
    if a.get("solar_model"):
        lines.append(f"Sun on the surface from horizontal data: {a['solar_model']}")
    if any(str(v).startswith("dew_point_") for v in ds.data_vars):
        lines.append("Dew points from the saturation vapour pressure of ISO 13788:2012 Annex E.")
    if "freeze_time_h" in a or "contents_temperature" in ds:
        lines.append("Stagnant contents: a lumped water node freezing at 0 °C with its latent heat (layers method guide, section 6).")
    if a.get("uncertainty_samples"):
        lines.append(f"Input tolerances of [uncertainty]: {a['uncertainty_samples']} samples (scrambled Halton points); "
                     "the 5 %, 50 % and 95 % quantiles are reported.")
    return lines


def _nonlinear_because(case: Case | None) -> str:
    """Why a case is nonlinear, in words (empty when the case is not at hand)."""
    if case is None:
        return ""
    why = []
    if any(sp.kind == "film" and sp.auto_film for sp in (case.inside, case.outside)):
        why.append("automatic films")
    if any(not spec.is_gap and not spec.material.is_constant for spec in case.layers):
        why.append("a temperature-dependent conductivity")
    if case.inside.kind == "contents":
        why.append("contents that freeze")
    return f" ({', '.join(why)})" if why else ""


def _film_lines(case: Case) -> list[str]:
    """How each film of the case was modelled, in the exchange room's own words."""
    from layers.exchange import exchanges

    return [text for ex in exchanges(case) if (text := ex.model_description())]


_REFERENCES_RUN = [
    "ISO 6946:2017, Building components and building elements — Thermal resistance and thermal transmittance — Calculation methods.",
    "ISO 10456:2007, Building materials and products — Hygrothermal properties (material values where the library cites it).",
    "Carslaw & Jaeger, Conduction of Heat in Solids (1959); Incropera et al., Fundamentals of Heat and Mass Transfer, 6th ed.",
]


def _run_key_figures(ds: xr.Dataset) -> tuple[Table, list[tuple[str, str]]]:
    """Headline figures of a run from its headline attributes (:func:`layers.catalogue.headline_attributes`)."""
    from layers.catalogue import SUMMARY_PREFIX, headline_attributes

    h = {k[len(SUMMARY_PREFIX):]: v for k, v in ds.attrs.items() if k.startswith(SUMMARY_PREFIX)}
    if "surface_temperature_outside_max_degC" not in h:
        h = {k[len(SUMMARY_PREFIX):]: v for k, v in headline_attributes(ds).items()}
    flow_units = h.get("heat_flow_inside_mean_units", ds["heat_flow_inside"].attrs.get("units", ""))
    rows = []
    headline = []

    def add(label: str, value: str) -> None:
        rows.append(_cells(label, Cell(value, "num")))
        headline.append((label, value))

    add("outside surface temperature, maximum", _temp(h["surface_temperature_outside_max_degC"]))
    add("outside surface temperature, minimum", _temp(h["surface_temperature_outside_min_degC"]))
    if "surface_temperature_inside_max_degC" in h:
        add("inside surface temperature, maximum", _temp(h["surface_temperature_inside_max_degC"]))
        add("inside surface temperature, minimum", _temp(h["surface_temperature_inside_min_degC"]))
    add("mean heat flow through the inside surface (positive outward)", _with_units(h["heat_flow_inside_mean"], flow_units))
    per = ds.attrs.get("heat_total_units", "J m-2")
    unit = {"J m-2": "kWh/m²", "J m-1": "kWh/m", "J": "kWh"}.get(per, "kWh")
    if "heat_in_inside_total" in ds.attrs:
        add("energy in through the inside surface", f"{_num(float(ds.attrs['heat_in_inside_total']) / 3.6e6)} {unit}")
    if "heat_out_outside_total" in ds.attrs:
        add("energy out through the outside surface", f"{_num(float(ds.attrs['heat_out_outside_total']) / 3.6e6)} {unit}")
    for key, label in (("time_to_freezing_h", "contents first at 0 °C after"), ("freeze_time_h", "freeze time (max_ice_fraction of ice)")):
        if key in ds.attrs:
            v = float(ds.attrs[key])
            add(label, f"{_num(v, '.2f')} h" if math.isfinite(v) else "not within the run")
    add("duration of the run", _duration(float(h.get("duration_s", 0.0))))
    return Table("Key figures", ["figure", "value"], rows), headline


def _run_section(result: Result, anchor: str) -> Section:
    from layers.report import run_cautions, run_summary

    ds, case = result.ds, result.case
    s = _common(result, anchor)
    start, end = ds["time"].values[0], ds["time"].values[-1]
    s.job = (f"Transient heat transfer through “{s.title}” ({ds.attrs.get('geometry', '')}) from {_utc(start)} to {_utc(end)}: "
             "surface temperatures, heat flows and the temperature field under the given boundary conditions.")
    _inputs(result, s)
    s.method = _method_run(ds, case)
    s.references = list(_REFERENCES_RUN)
    if any(str(v).startswith("dew_point_") for v in ds.data_vars):
        s.references.append("ISO 13788:2012, Hygrothermal performance of building components and building elements.")
    s.key_figures, s.headline = _run_key_figures(ds)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            s.summary = run_summary(ds, case)
            s.summary_heading = "Summary as layers run prints it"
        except (KeyError, ValueError, CaseError):
            s.summary = ""
        s.cautions = _dedupe(run_cautions(ds, case if case is not None else _stand_in(ds)))
    for kind, caption in (("surfaces", "Surface temperatures and heat flows over the run"),
                          ("profiles", "Temperature profiles through the construction at selected times"),
                          ("carpet", "Temperature field over depth and time")):
        if kind != "surfaces" and "temperature" not in ds:
            continue
        fig = _figure(ds, kind, caption)
        if fig is not None:
            s.figures.append(fig)
    _provenance(result, s)
    return s


def _sizing_section(result: Result, anchor: str) -> Section:
    from layers.sizing import cautions

    ds, case = result.ds, result.case
    s = _common(result, anchor)
    layer = int(ds.attrs.get("sized_layer", 0) or 0)
    thick = ds["thickness"].values
    what = ds["thickness"].attrs.get("long_name", f"thickness of layer {layer}")
    names = [str(v)[len("passes_"):] for v in ds.data_vars if str(v).startswith("passes_") and v != "passes_all"]
    s.job = (f"Choice of the {what} of “{s.title}” among {thick.size} candidate thicknesses, "
             f"against {len(names)} criteria ({', '.join(_CRITERIA.get(n, n) for n in names)}).")
    _inputs(result, s)
    s.method = [
        "Each candidate is evaluated with the one steady solver of the tool (one-dimensional conduction with "
        "temperature-dependent conductivities by the Kirchhoff transform; layers method guide, sections 9 and 10).",
        f"Design conditions: {ds.attrs.get('design_conditions', 'not recorded')}; sun and sky left out, as usual for steady design.",
        "The recommended thickness is the thinnest candidate that meets every criterion.",
    ]
    if "freeze_time" in ds:
        s.method.append("Freeze time: a transient run per candidate with the contents freezing at 0 °C "
                        f"(time step {_duration(float(ds.attrs['time_step']))})." if "time_step" in ds.attrs else
                        "Freeze time: a transient run per candidate with the contents freezing at 0 °C.")
    if "dew_point" in ds.attrs:
        s.method.append("Dew point of the outside air from the saturation vapour pressure of ISO 13788:2012 Annex E.")
    if "probability_passes" in ds:
        s.method.append(f"Input tolerances of [uncertainty]: {ds.attrs.get('uncertainty_samples', '?')} samples; "
                        f"the chance of meeting every criterion is given per candidate.")
    s.references = []
    if "passes_max_surface_temperature" in ds:
        s.references.append("ISO 13732-1:2006, Ergonomics of the thermal environment — Methods for the assessment of human "
                            "responses to contact with surfaces — Part 1: Hot surfaces; ASTM C1055 (touch limits, quoted in the cautions).")
    if "dew_point" in ds.attrs:
        s.references.append("ISO 13788:2012 (saturation vapour pressure, dew point).")
    if ds.attrs.get("geometry", "planar") == "planar":
        s.references.append("ISO 6946:2017 (surface resistances of walls).")
    s.references.append("Incropera et al., Fundamentals of Heat and Mass Transfer, 6th ed. (steady conduction in layers and cylinders).")
    # the criteria
    limits = []
    if "max_surface_temperature" in ds.attrs:
        limits.append(("touch limit (outside surface at most)", _temp(ds.attrs["max_surface_temperature"])))
    if "dew_point" in ds.attrs:
        limits.append(("dew point of the outside air", _temp(ds.attrs["dew_point"])))
        limits.append(("outside surface at least this far above it", f"{_num(ds.attrs.get('dew_point_margin'), '.3g')} K"))
    if "max_heat_loss" in ds.attrs:
        limits.append(("heat-loss budget", _with_units(ds.attrs["max_heat_loss"], ds.attrs.get("max_heat_loss_units", ""))))
    if "min_freeze_time_h" in ds.attrs:
        limits.append((f"freeze time: {_num(ds.attrs.get('max_ice_fraction', 0.25), 'g')} of the water frozen not before",
                       f"{_num(ds.attrs['min_freeze_time_h'], 'g')} h"))
    if "service_temperature_limits" in ds.attrs:
        limits.append(("maximum service temperature", str(ds.attrs["service_temperature_limits"])))
    rec = float(ds.attrs.get("recommended_thickness", math.nan))
    rec_text = f"{_num(rec * 1000, 'g')} mm" if math.isfinite(rec) else "none: no candidate meets every criterion"
    s.verdict = Cell(f"Recommended thickness: {rec_text}", "pass" if math.isfinite(rec) else "fail")
    rows = [_cells(label, Cell(value, "num")) for label, value in limits]
    s.key_figures = Table("Criteria", ["criterion", "limit"], rows)
    s.headline = [("recommended thickness", rec_text)]
    if math.isfinite(rec):
        i = int(np.argmin(np.abs(thick - rec)))
        if "surface_temperature_outside" in ds:
            s.headline.append(("outside surface at the recommended thickness", _temp(ds["surface_temperature_outside"].values[i])))
        if "heat_flow" in ds:
            s.headline.append(("heat flow at the recommended thickness", _with_units(ds["heat_flow"].values[i], ds["heat_flow"].attrs.get("units"))))
    if "recommended_thickness_at_confidence" in ds.attrs:
        at = float(ds.attrs["recommended_thickness_at_confidence"])
        s.headline.append((f"recommended with {_num(100 * float(ds.attrs.get('confidence', math.nan)), 'g')} % confidence",
                           f"{_num(at * 1000, 'g')} mm" if math.isfinite(at) else "none"))
    # candidates x criteria
    head = ["thickness [mm]"]
    if "surface_temperature_outside" in ds:
        head += ["outside surface [°C]", f"heat flow [{_units(ds['heat_flow'].attrs.get('units', ''))}]"]
    if "freeze_time" in ds:
        head += ["to 0 °C [h]", "to ice [h]"]
    head += [f"{_SHORT_CRITERIA.get(n, n)} (margin)" for n in names] + ["all"]
    if "probability_passes" in ds:
        head.append("chance all pass [%]")
    n = thick.size
    shown = list(range(n)) if n <= SIZING_ROWS else sorted({*range(SIZING_ROWS // 2), *range(n - SIZING_ROWS // 2, n)})
    rows = []
    fine = n > 1 and float(np.min(np.diff(thick))) < 1e-4 - 1e-12
    for i in shown:
        row = [Cell(_num(thick[i] * 1000, ".2f" if fine else ".1f"), "num")]
        if "surface_temperature_outside" in ds:
            row += [Cell(_num(ds["surface_temperature_outside"].values[i], ".2f"), "num"), Cell(_num(ds["heat_flow"].values[i], ".2f"), "num")]
        if "freeze_time" in ds:
            row += [Cell(_num(ds["time_to_freezing"].values[i], ".2f"), "num"), Cell(_num(ds["freeze_time"].values[i], ".2f"), "num")]
        for name in names:
            ok = bool(ds[f"passes_{name}"].values[i])
            margin = ""
            if f"margin_{name}" in ds:
                m = ds[f"margin_{name}"]
                margin = f" ({_num(m.values[i], '+.2f')} {_units(m.attrs.get('units', ''))})" if math.isfinite(float(m.values[i])) else " (not reached)"
            row.append(Cell(("pass" if ok else "FAIL") + margin, "pass" if ok else "fail"))
        ok = bool(ds["passes_all"].values[i]) if "passes_all" in ds else all(bool(ds[f"passes_{n_}"].values[i]) for n_ in names)
        row.append(Cell("pass" if ok else "FAIL", "pass" if ok else "fail"))
        if "probability_passes" in ds:
            row.append(Cell(_num(100 * float(ds["probability_passes"].values[i]), ".1f"), "num"))
        rows.append(row)
    note = "Margins: positive where the criterion is met."
    if n > SIZING_ROWS:
        note += f" {n} candidates: the thinnest and thickest {SIZING_ROWS // 2} each are shown; all are in the file."
    s.results.append(Table("Candidates and criteria", head, rows, note=note, wide=True))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        own = cautions(case if case is not None and case.sizing is not None else _stand_in(ds))
    s.cautions = _dedupe([*own, str(ds.attrs.get("caution", CAUTION))])
    fig = _figure(ds, "sizing", "Criteria over the candidate thicknesses")
    if fig is not None:
        s.figures.append(fig)
    _provenance(result, s)
    return s


def _periodic_section(result: Result, anchor: str) -> Section:
    ds = result.ds
    s = _common(result, anchor)
    period = float(ds.attrs.get("period_h", math.nan))
    s.job = f"Dynamic thermal characteristics of “{s.title}” for a periodic temperature variation of period {_num(period, 'g')} h."
    _inputs(result, s)
    s.method = [
        f"{ds.attrs.get('source', 'ISO 13786:2017 layer transfer-matrix method')}: each layer is a 2×2 transfer matrix of "
        "complex amplitudes (ISO 13786:2017 §6); surface films and air gaps are resistive elements.",
        f"Period {_num(period, 'g')} h. Time shifts follow the standard: negative is a delay.",
        "Surface resistances are those of the case's films (ISO 6946:2017 conventional values where none is given).",
    ]
    s.references = ["ISO 13786:2017, Thermal performance of building components — Dynamic thermal characteristics — Calculation methods.",
                    "ISO 6946:2017 (thermal transmittance and surface resistances)."]
    rows = []
    for name in ds.data_vars:
        da = ds[name]
        if da.ndim != 0:
            continue
        value, units = float(da.values), str(da.attrs.get("units", ""))
        if units == "J m-2 K-1":  # the trade writes areal heat capacities in kJ
            value, units = value / 1000.0, "kJ m-2 K-1"
        rows.append(_cells(str(da.attrs.get("long_name", name)), Cell(_with_units(value, units, ".4g"), "num")))
        s.headline.append((str(da.attrs.get("long_name", name)), _with_units(value, units, ".4g")))
    s.key_figures = Table("Dynamic thermal characteristics", ["characteristic", "value"], rows)
    s.cautions = _dedupe([str(ds.attrs.get("caution", CAUTION)), CAUTION])
    _provenance(result, s)
    return s


def _sweep_section(result: Result, anchor: str) -> Section:
    from layers.comparison import SWEEP_FIGURES
    from layers.plots import sweep_dimensions
    from layers.report import run_cautions, sweep_summary

    ds, case = result.ds, result.case
    s = _common(result, anchor)
    dims = sweep_dimensions(ds)
    s.job = (f"Transient runs of “{s.title}” at each of {ds.attrs.get('sweep_points', '?')} points of a grid "
             f"({ds.attrs.get('sweep_dimensions', ', '.join(dims))}), to show how the results depend on the swept inputs.")
    _inputs(result, s)
    s.method = _method_run(ds, case) + ["Each point is the case with the swept values written in, read and run as its own case."]
    s.references = list(_REFERENCES_RUN)
    rows = []
    for label, get, source in SWEEP_FIGURES:
        if source not in ds:
            continue
        values = np.asarray(get(ds).values, dtype=float)
        units = ds[source].attrs.get("units", "")
        lo, hi = _with_units(np.nanmin(values), units), _with_units(np.nanmax(values), units)
        rows.append(_cells(label, Cell(lo, "num"), Cell(hi, "num")))
        s.headline.append((f"{label} (range over the points)", f"{lo} … {hi}"))
    s.key_figures = Table("Key figures over the points", ["figure per point", "lowest", "highest"], rows)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            s.summary = sweep_summary(ds, case)
            s.summary_heading = "Every point, as layers sweep prints it"
        except (KeyError, ValueError, IndexError):
            s.summary = ""
        s.cautions = _dedupe(run_cautions(ds, case if case is not None else _stand_in(ds)))
    fig = _figure(ds, "sweep", "Mean heat flow through the inside surface at each point of the grid")
    if fig is not None:
        s.figures.append(fig)
    _provenance(result, s)
    return s


def _month_name(m: Any) -> str:
    try:
        return calendar.month_name[int(m)]
    except (ValueError, IndexError, TypeError):
        return str(m)


def _interface_names(ds: xr.Dataset) -> list[str]:
    n = ds.sizes.get("interface", 0)
    names = []
    for k in range(n):
        label = f"interface {int(ds['interface'].values[k]) if 'interface' in ds.coords else k}"
        if "interface_name" in ds and ds["interface_name"].ndim == 1:
            label += f" ({ds['interface_name'].values[k]})"
        elif "layer_interface" in ds and ds["layer_interface"].ndim == 1:
            label += f" ({_num(float(ds['layer_interface'].values[k]) * 1000, '.1f')} mm)"
        names.append(label)
    return names


def _condensation_section(result: Result, anchor: str) -> Section:
    ds = result.ds
    s = _common(result, anchor)
    verdict = str(ds.attrs.get("verdict", "not recorded"))
    first = int(ds.attrs["first_month"]) if str(ds.attrs.get("first_month", "")).strip().lstrip("-").isdigit() else None
    s.job = f"Monthly check of interstitial condensation by vapour diffusion (ISO 13788) in “{s.title}”."
    _inputs(result, s)
    # the thermal boundaries' air temperatures are not what this check uses: the monthly climate is
    s.boundaries = []
    climate = _monthly_climate(ds)
    if climate is not None:
        s.inputs.append(climate)
    s.method = [str(ds.attrs.get("method") or "ISO 13788:2012 monthly method for interstitial condensation (Glaser method)")
                + ": steady vapour diffusion through the layers at each month's mean conditions; vapour condenses where its "
                  "pressure would exceed saturation, and the condensate is carried from month to month."]
    if first:
        s.method.append(f"The calculation starts in {_month_name(first)}"
                        + (f": {ds.attrs['first_month_rule']}." if ds.attrs.get("first_month_rule") else "."))
    elif first == 0:
        s.method.append("No month condenses: the calculation has no starting month.")
    for key, label in (("surface_resistances", "Surface resistances"), ("inside_humidity", "Inside humidity"),
                       ("vapour_data", "Vapour resistance data (ISO 10456)")):
        if ds.attrs.get(key):
            s.method.append(f"{label}: {ds.attrs[key]}.")
    s.method.append("Saturation vapour pressure per ISO 13788:2012 Annex E.")
    s.references = ["ISO 13788:2012, Hygrothermal performance of building components and building elements — Internal surface "
                    "temperature to avoid critical surface humidity and interstitial condensation — Calculation methods.",
                    "ISO 10456:2007 (vapour resistance factors)."]
    s.verdict = Cell(f"Verdict: {verdict}", _VERDICT_CLASS.get(verdict, "note"))
    if "layer_equivalent_air_thickness" in ds and "layer" in ds.dims:
        mu = ds["layer_vapour_resistance_factor"].values if "layer_vapour_resistance_factor" in ds else None
        names_l = ds["layer_name"].values if "layer_name" in ds else ds["layer"].values
        body = [_cells(int(ds["layer"].values[i]) if "layer" in ds.coords else i + 1, str(names_l[i]),
                       Cell(_num(mu[i], ".4g") if mu is not None else "–", "num"),
                       Cell(_num(ds["layer_equivalent_air_thickness"].values[i], ".4g"), "num"))
                for i in range(ds.sizes["layer"])]
        s.inputs.insert(min(2, len(s.inputs)), Table(
            "Vapour resistance of the layers (as the calculation used it)", ["#", "layer", "μ [-]", "s_d [m]"], body,
            note="s_d = μ·d; a membrane has its own s_d and no μ (–)."))
    acc = ds["accumulated_moisture"]
    rate = ds["condensation_rate"]
    acc_units = acc.attrs.get("units", "kg m-2")
    a = np.asarray(acc.transpose("month", "interface").values, dtype=float)
    r = np.asarray(rate.transpose("month", "interface").values, dtype=float)
    months = [int(m) for m in (ds["month"].values if "month" in ds.coords else np.arange(1, a.shape[0] + 1))]
    names = _interface_names(ds)
    rows = [_cells("verdict", Cell(verdict, _VERDICT_CLASS.get(verdict, "note")))]
    rows.append(_cells("first month of the calculation", _month_name(first) if first else "none (no month condenses)"))
    peak = float(np.nanmax(a)) if np.isfinite(a).any() else math.nan
    s.headline = [("verdict", verdict), ("largest accumulated moisture", _with_units(peak, acc_units, ".4g"))]
    rows.append(_cells("largest accumulated moisture", Cell(_with_units(peak, acc_units, ".4g"), "num")))
    if math.isfinite(peak) and peak > 0:
        m, k = np.unravel_index(int(np.nanargmax(a)), a.shape)
        rows.append(_cells("where and when", f"{names[k]}, end of {_month_name(months[m])}"))
    if "moisture_remaining_after_year" in ds.attrs:
        rows.append(_cells("remaining after twelve months", Cell(_with_units(ds.attrs["moisture_remaining_after_year"],
                                                                              ds.attrs.get("moisture_remaining_after_year_units", acc_units)), "num")))
    wet = [_month_name(months[i]) for i in range(r.shape[0]) if np.nanmax(r[i]) > 0]
    rows.append(_cells("months with condensation", ", ".join(wet) if wet else "none"))
    s.key_figures = Table("Key figures", ["figure", "value"], rows)
    active = [k for k in range(a.shape[1]) if np.nanmax(a[:, k]) > 0 or np.nanmax(r[:, k]) > 0]
    order = list(range(len(months)))
    if first and first in months:
        order = order[months.index(first):] + order[:months.index(first)]
    if active and str(acc_units) == "kg m-2" and str(rate.attrs.get("units", "kg m-2 s-1")) == "kg m-2 s-1":
        head = ["month"]
        for k in active:
            head += [f"{names[k]}: condensed (+) or dried (−) in the month [g/m²]", f"{names[k]}: at the month's end [g/m²]"]
        body = []
        before = np.zeros(a.shape[1])  # the calculation starts dry
        for i in order:
            row = [Cell(_month_name(months[i]))]
            for k in active:
                row += [Cell(_num((a[i, k] - before[k]) * 1000.0, ".1f"), "num"), Cell(_num(a[i, k] * 1000.0, ".1f"), "num")]
            before = a[i]
            body.append(row)
        s.results.append(Table("Month by month, in calculation order, at the interfaces where vapour condenses", head, body,
                               note="The month's change of accumulated_moisture (what condensed or dried out; the calculation "
                                    "starts dry) and the amount at the month's end (kg/m² in the file, g/m² here).", wide=True))
    if "interface_temperature" in ds:
        t = np.asarray(ds["interface_temperature"].transpose("month", "interface").values, dtype=float)
        body = [[Cell(_month_name(months[i]))] + [Cell(_num(t[i, k], ".2f"), "num") for k in range(t.shape[1])] for i in order]
        s.results.append(Table("Interface temperatures [°C] at each month's mean conditions (steady, the case's films)",
                               ["month"] + [str(n) for n in names], body, wide=True))
    if "vapour_pressure" in ds and "saturation_vapour_pressure" in ds:
        p = np.asarray(ds["vapour_pressure"].transpose("month", "interface").values, dtype=float)
        ps = np.asarray(ds["saturation_vapour_pressure"].transpose("month", "interface").values, dtype=float)
        i = int(np.nanargmin(np.nanmin(ps - p, axis=1))) if np.isfinite(ps - p).any() else 0
        units = ds["vapour_pressure"].attrs.get("units", "Pa")
        body = [[Cell(names[k]), Cell(_num(p[i, k], ".0f"), "num"), Cell(_num(ps[i, k], ".0f"), "num"),
                 Cell(_num(ps[i, k] - p[i, k], ".0f"), "num" if ps[i, k] - p[i, k] > 0 else "fail")] for k in range(p.shape[1])]
        s.results.append(Table(f"Vapour pressures in {_month_name(months[i])}, the month closest to saturation",
                               ["interface", f"vapour pressure [{_units(units)}]", f"saturation pressure [{_units(units)}]",
                                f"saturation minus vapour [{_units(units)}]"], body))
    from layers.plots import KINDS as PLOT_KINDS

    if "condensation" in PLOT_KINDS:  # the figure kind of plots.py, where it has one
        fig = _figure(ds, "condensation", "Vapour and saturation pressures, and accumulated moisture")
        if fig is not None:
            s.figures.append(fig)
    try:  # the wording of `layers condensation`, where this version has it
        from layers.iso13788 import summary_lines

        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            s.summary = "\n".join(summary_lines(ds))
        s.summary_heading = "Summary as layers condensation prints it"
    except (ImportError, KeyError, ValueError, IndexError, TypeError):
        pass
    s.cautions = _dedupe([*condensation_cautions(), str(ds.attrs.get("caution", CAUTION)), CAUTION])
    _provenance(result, s)
    return s


def _monthly_climate(ds: xr.Dataset) -> Table | None:
    """The monthly climate the ISO 13788 check used, as a table (None where the file lacks it)."""
    names = ("air_temperature_inside", "vapour_pressure_inside", "air_temperature_outside", "relative_humidity_outside",
             "vapour_pressure_outside")
    if not all(name in ds for name in names):
        return None
    months = [int(m) for m in ds["month"].values]
    ti, pi, te, rh, pe = (np.asarray(ds[name].values, dtype=float) for name in names)
    body = [[Cell(_month_name(m)), Cell(_num(ti[i], ".1f"), "num"), Cell(_num(pi[i], ".0f"), "num"), Cell(_num(te[i], ".1f"), "num"),
             Cell(_num(100.0 * rh[i], ".0f"), "num"), Cell(_num(pe[i], ".0f"), "num")] for i, m in enumerate(months)]
    return Table("Monthly mean climate of the check ([condensation] of the case)",
                 ["month", "inside air [°C]", "inside vapour pressure [Pa]", "outside air [°C]", "outside RH [%]",
                  "outside vapour pressure [Pa]"], body)


def condensation_cautions() -> list[str]:
    """The caution ``layers condensation`` prints with its result (its method's
    limits), or, without that command in this version, the report's own."""
    try:
        from layers.iso13788 import CAUTION_GLASER
    except ImportError:
        return [_CONDENSATION_CAUTION]
    return [CAUTION_GLASER]


_BUILDERS = {"run": _run_section, "sizing": _sizing_section, "periodic": _periodic_section,
             "sweep": _sweep_section, "condensation": _condensation_section}


# --------------------------------------------------------------------------- #
# several files: the comparison


@dataclass
class ComparisonPart:
    intro: str
    tables: list[Table] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    figures: list[Figure] = field(default_factory=list)
    text: str = ""


def _letters(n: int) -> list[str]:
    return [chr(ord("A") + i) if i < 26 else f"R{i + 1}" for i in range(n)]


def _comparison(results: Sequence[Result], sections: Sequence[Section]) -> ComparisonPart:
    tags = _letters(len(results))
    part = ComparisonPart(intro=f"{len(results)} result files: " + "; ".join(
        f"{t} = {r.name} ({_KIND_LABELS[r.kind]})" for t, r in zip(tags, results)) + ".")
    if all(r.kind == "run" for r in results):
        from layers.comparison import compare_runs

        try:
            c = compare_runs([r.path for r in results])
        except CaseError as exc:
            part.notes.append(f"The runs could not be aligned for a full comparison ({exc.reason}); their headline figures follow side by side.")
        else:
            hours = (c.end - c.start) / np.timedelta64(1, "h")
            part.notes.append(f"Compared over the common window {_utc(c.start)} to {_utc(c.end)} ({_num(hours, 'g')} h); "
                              + ("identical meshes." if c.same_mesh else "the meshes differ: compared at the surfaces and layer faces.")
                              + (" Heat-flow means from each run's step-by-step totals." if c.exact_heat_flow_means else
                                 " Heat-flow means from the compared samples (trapezoidal)."))
            keys = list(c.differing_keys)
            if keys:
                shown = ", ".join(keys[:COMPARISON_KEYS]) + (f" and {len(keys) - COMPARISON_KEYS} more (see each case text)"
                                                             if len(keys) > COMPARISON_KEYS else "")
                part.notes.append(f"Case keys that differ: {shown}.")
                if len(keys) <= COMPARISON_KEYS:
                    for t, label in zip(tags, c.labels):
                        part.notes.append(f"{t}: {label}")
            head = ["metric over the common window", "units"]
            for i, t in enumerate(tags):
                head += [t] + ([f"{t} − {tags[0]}"] if i else [])
            rows = []
            for m in c.metrics:
                row = [Cell(m.name), Cell(_units(m.units))]
                for i, (v, d) in enumerate(zip(m.values, m.differences)):
                    row.append(Cell(_num(v), "num"))
                    if i:
                        row.append(Cell(_num(d, "+.4g"), "num"))
                rows.append(row)
            part.tables.append(Table("Metrics side by side (temperature differences in K)", head, rows, wide=True))
            rows = []
            for m in c.largest_differences:
                rows.append([Cell(m.name), Cell(_units(m.units))] + [Cell(_num(v), "num") for v in m.values[1:]])
            part.tables.append(Table(f"Largest difference from {tags[0]} at any compared time", ["series", "units", *tags[1:]], rows))
            from layers.plots import plot_comparison

            try:
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")
                    fig = plot_comparison(c.dataset, [f"{t}: {lab}" for t, lab in zip(tags, c.labels)])
                    buffer = io.BytesIO()
                    fig.savefig(buffer, format="png", dpi=FIGURE_DPI)
                part.figures.append(Figure("The runs overlaid", base64.b64encode(buffer.getvalue()).decode("ascii"), "The runs overlaid"))
            except (ValueError, KeyError, IndexError, TypeError):
                pass
            return part
    if all(r.kind == "sweep" for r in results):
        from layers.comparison import compare_sweeps

        try:
            part.text = compare_sweeps([r.path for r in results])
            return part
        except CaseError as exc:
            part.notes.append(f"The sweeps do not compare point by point ({exc.reason}); their headline figures follow side by side.")
    labels: list[str] = []
    for s in sections:
        for label, _ in s.headline:
            if label not in labels:
                labels.append(label)
    rows = [[Cell("kind")] + [Cell(s.kind_label) for s in sections], [Cell("title")] + [Cell(s.title) for s in sections]]
    for label in labels:
        rows.append([Cell(label)] + [Cell(dict(s.headline).get(label, "–"), "num") for s in sections])
    part.tables.append(Table("Headline figures side by side", ["", *tags], rows, wide=True))
    return part


# --------------------------------------------------------------------------- #
# the page


def _environment():
    import jinja2

    return jinja2.Environment(
        loader=jinja2.FileSystemLoader(str(Path(__file__).with_name("templates"))),
        autoescape=True,
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
    )


def render_report(paths: Sequence[str | os.PathLike], *, series_dirs: Sequence[str | os.PathLike] = (),
                  now: str | None = None) -> tuple[str, list[str]]:
    """The report page for the result files ``paths`` (HTML text) and the cautions it carries.

    Parameters
    ----------
    paths : sequence of str or Path
        One or more result files (run, sizing, periodic, sweep, condensation) [-].
    series_dirs : sequence of str or Path, optional
        Folders to look in for the series files of the cases (after the
        folder of each result file), to describe the inputs in full [-].
    now : str, optional
        The report's own creation time (UTC ISO 8601); default the present.

    Raises
    ------
    CaseError
        A file that is missing, not netCDF, or of no known kind.
    """
    if not paths:
        raise CaseError("(command line)", "RUN", "give at least one result file")
    results = [open_result(p, tuple(Path(d) for d in series_dirs)) for p in paths]
    sections = [_BUILDERS[r.kind](r, f"result-{i + 1}") for i, r in enumerate(results)]
    comparison = _comparison(results, sections) if len(results) > 1 else None
    from layers.results import utc_now

    created = now or utc_now()
    every = _dedupe([line for s in sections for line in s.cautions])
    cautions = [line for line in every if line != CAUTION] + [CAUTION]  # most specific first, the general one last
    if len(sections) == 1:
        heading = sections[0].title
    else:
        heading = f"Calculation report: {len(sections)} results"
    html = _environment().get_template("report.html.j2").render(
        heading=heading, sections=sections, comparison=comparison, created=created,
        created_text=created.replace("T", " ").replace("Z", " UTC"), version=__version__,
        general_caution=CAUTION, files=[r.name for r in results], letters=_letters(len(results)),
    )
    return html, cautions


def default_output(paths: Sequence[str | os.PathLike]) -> Path:
    """``<stem of the first file>-report.html`` in the current folder."""
    return Path(f"{Path(paths[0]).stem}-report.html")


def write_report(paths: Sequence[str | os.PathLike], out: str | os.PathLike | None = None,
                 series_dirs: Sequence[str | os.PathLike] = ()) -> Written:
    """Write the report page, atomically and never over an existing file.

    Parameters
    ----------
    paths : sequence of str or Path
        The result files [-].
    out : str or Path, optional
        The page (``.html``); default :func:`default_output` [-].
    series_dirs : sequence of str or Path, optional
        Folders to look in for the cases' series files (see :func:`render_report`) [-].

    Returns
    -------
    Written
        The file written and the cautions the page carries.

    Raises
    ------
    CaseError
        Bad input files, or an output that exists, has another suffix or
        cannot be written (key ``-o``).
    """
    from layers.results import exists_error, refuse_existing, write_once

    target = Path(out) if out else default_output(paths)
    if not out and target.exists():
        raise CaseError(str(target), "-o", "exists already; layers never overwrites a file (choose a name with -o)")
    refuse_existing(target, SUFFIXES)
    html, cautions = render_report(paths, series_dirs=series_dirs)
    data = html.encode("utf-8")
    try:
        written = write_once(target, lambda tmp: Path(tmp).write_bytes(data))
    except FileExistsError:
        raise exists_error(target) from None
    except OSError as exc:
        raise CaseError(str(target), "-o", f"cannot write the report ({exc.strerror or exc})") from None
    return Written(written, cautions)


__all__ = ["KINDS", "Written", "default_output", "open_result", "render_report", "result_kind", "write_report"]
