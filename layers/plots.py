"""Every figure: run carpets, surface histories, depth profiles, sizing charts and sweep maps.

The plotting functions take a Dataset written by :mod:`layers.results` (or by
``layers size`` or ``layers sweep``) and return a :class:`matplotlib.figure.Figure`; they never
re-run a case and never print.  :func:`cmd_plot` is the ``layers plot``
command: it opens the run, draws one figure and saves it without ever
overwriting a file.

Conventions of every figure
---------------------------
* Axis labels end with the unit in brackets, taken from the variable's
  ``units`` attribute (``degC`` is shown as ``°C``, ``W m-2`` as ``W/m²``).
* The title is the run's ``title`` attribute; the caution
  (``caution`` attribute, else :data:`layers.CAUTION`) is printed in small
  type at the bottom.
* Colours: the carpet and the sweep map use ``cividis``, a perceptually uniform colour map
  designed to read the same for colour-blind readers and in greyscale.  Lines
  use :data:`PALETTE`, five colours of our own chosen so that every pair stays
  distinguishable under simulated protanopia, deuteranopia and tritanopia,
  and every line also gets its own dash pattern and marker (:data:`LINESTYLES`,
  :data:`MARKERS`) so the figure still reads when printed in grey.
* Time axes are UTC (the run's time coordinate) with concise date labels.
* Figures are 10 x 6 in at 120 dpi (1200 x 720 pixels as PNG).
"""

from __future__ import annotations

import datetime as dt
import math
import os
import re
import sys
import textwrap
import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import xarray as xr

from layers.about import CAUTION, __version__
from layers.errors import CaseError
from layers.results import exists_error, write_once

#: Figure size [in] and resolution [dots per inch] of every figure.
FIGSIZE = (10.0, 6.0)
DPI = 120

#: Line colours: navy, orange, sky blue, brick red, mid grey.  Own choice;
#: the smallest CIELAB distance between any two, under simulated
#: protanopia, deuteranopia and tritanopia (Machado et al. 2009, severity 1),
#: is above 25 (normal vision: above 38).
PALETTE = ("#1d3f73", "#e0902a", "#5fb0e6", "#8a2f1e", "#6b6b6b")
#: Dash patterns that go with :data:`PALETTE`, so greyscale prints still read.
LINESTYLES = ("solid", (0, (6, 2)), (0, (6, 2, 1.5, 2)), (0, (1.5, 1.5)), (0, (10, 2, 1.5, 2, 1.5, 2)))
#: Markers that go with :data:`PALETTE` (drawn sparsely along each line).
MARKERS = ("o", "s", "^", "D", "v")
#: Colour map of the carpet plot (perceptually uniform, colour-blind safe).
CARPET_CMAP = "cividis"
#: Fills of the material bands in the profile plot (light greys), and the
#: hatching of an air gap.
BAND_FILLS = ("#f2f2f2", "#dedede")
GAP_HATCH = "////"

#: Longest subtitle [characters] that fits on one line across the figure.
SUBTITLE_CHARS = 175

KINDS = ("carpet", "surfaces", "profiles", "sizing", "sweep", "condensation")
FORMATS = {".png": "png", ".svg": "svg", ".pdf": "pdf"}

_TEMPERATURE_UNITS = {"degC": "°C", "degree_Celsius": "°C", "degrees_Celsius": "°C", "celsius": "°C",
                      "deg_C": "°C", "degF": "°F", "degree_Fahrenheit": "°F"}
_SUPERSCRIPT = {"2": "²", "3": "³"}
_TOKEN = re.compile(r"^([A-Za-z%°µ]+)(-?\d+)?$")


# --------------------------------------------------------------------------- #
# labels and units


def pretty_units(units: str) -> str:
    """Units as shown on an axis: ``degC`` -> ``°C``, ``W m-2`` -> ``W/m²``.

    Parameters
    ----------
    units : str
        A CF/UDUNITS unit string (``"W m-1"``, ``"J m-2"``, ``"degC"``).

    Returns
    -------
    str
        The same unit for a reader; strings not in the space-separated
        ``symbol[exponent]`` form are returned unchanged.
    """
    units = str(units).strip()
    if units in _TEMPERATURE_UNITS:
        return _TEMPERATURE_UNITS[units]
    if units in ("1", ""):
        return "-"
    tokens = units.replace(".", " ").split()
    top, bottom = [], []
    for token in tokens:
        match = _TOKEN.match(token)
        if not match:
            return units
        symbol, power = match.group(1), int(match.group(2) or 1)
        symbol = _TEMPERATURE_UNITS.get(symbol, symbol)
        target = top if power > 0 else bottom
        power = abs(power)
        target.append(symbol + ("" if power == 1 else "".join(_SUPERSCRIPT.get(c, f"^{c}") for c in str(power))))
    text = "·".join(top) if top else "1"
    if bottom:
        text += "/" + (bottom[0] if len(bottom) == 1 else "(" + "·".join(bottom) + ")")
    return text


def _units(da: xr.DataArray, default: str | None = None) -> str:
    units = da.attrs.get("units", default)
    return "?" if units is None else str(units)


def axis_label(quantity: str, units: str) -> str:
    """``"quantity [unit]"`` with the unit shown for a reader (see :func:`pretty_units`)."""
    return f"{quantity} [{pretty_units(units)}]"


def _length_scale(units: str) -> tuple[float, str]:
    """Factor from ``units`` to millimetres, and the unit shown [-, str]."""
    if units in ("m", "metre", "meter", "metres", "meters"):
        return 1000.0, "mm"
    if units in ("mm", "millimetre", "millimeter"):
        return 1.0, "mm"
    try:
        from layers.units import ureg

        return float(ureg.Quantity(1.0, units).to("mm").magnitude), "mm"
    except Exception:  # noqa: BLE001 - an unreadable unit: show the numbers as stored
        return 1.0, units


def _caution(ds: xr.Dataset) -> str:
    return str(ds.attrs.get("caution") or CAUTION)


def _subtitle(ds: xr.Dataset, what: str) -> str:
    bits = [what]
    if ds.attrs.get("geometry"):
        bits.append(str(ds.attrs["geometry"]))
    if ds.attrs.get("scheme"):
        bits.append(f"scheme {ds.attrs['scheme']}")
    if ds.attrs.get("created"):
        bits.append(f"run {ds.attrs['created']}")
    # one line across the figure (about 175 characters at 8.5 pt): drop the
    # trailing details (run time, scheme, geometry) rather than overlap the axes
    while len(bits) > 1 and len("  ·  ".join(bits)) > SUBTITLE_CHARS:
        bits.pop()
    return "  ·  ".join(bits)


# --------------------------------------------------------------------------- #
# figure scaffolding


def _use_agg() -> None:
    """Select the Agg backend for a process that has not started pyplot.

    The figures themselves are built on :class:`matplotlib.figure.Figure`
    with an Agg canvas and never touch pyplot, so no window opens; the
    backend switch is skipped once pyplot is loaded, because switching then
    would close the figures a user has open (a notebook, for instance).
    """
    import matplotlib

    if "matplotlib.pyplot" not in sys.modules:
        matplotlib.use("Agg")


def new_figure(ds: xr.Dataset, what: str, nrows: int = 1, sharex: bool = False):
    """A 10 x 6 in Figure with the run's title, a subtitle and the caution.

    Parameters
    ----------
    ds : xarray.Dataset
        The run (or sizing) Dataset; its ``title`` and ``caution`` are used.
    what : str
        What the figure shows (the subtitle's first words).
    nrows : int
        Number of stacked axes.
    sharex : bool
        Whether the stacked axes share the x axis.

    Returns
    -------
    (Figure, list of Axes)
    """
    _use_agg()
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=FIGSIZE, dpi=DPI, layout="constrained")
    FigureCanvasAgg(fig)
    # keep a strip at the top for the titles and one at the bottom for the
    # caution, tall enough for its wrapped lines (about 190 characters a line
    # at 6.5 pt across 10 in, 0.02 of the height each)
    caution = _caution(ds)
    strip = 0.012 + 0.021 * max(1, math.ceil(len(caution) / 185))
    fig.get_layout_engine().set(rect=(0.0, strip, 1.0, 0.92 - strip), h_pad=0.04, w_pad=0.04)
    axes = fig.subplots(nrows, 1, sharex=sharex, squeeze=False)[:, 0].tolist()
    fig.text(0.5, 0.992, str(ds.attrs.get("title") or "untitled run"), ha="center", va="top",
             fontsize=13, fontweight="bold")
    fig.text(0.5, 0.952, _subtitle(ds, what), ha="center", va="top", fontsize=8.5, color="#444444")
    fig.text(0.01, 0.006, caution, ha="left", va="bottom", fontsize=6.5, color="#444444",
             wrap=True, gid="caution")
    for ax in axes:
        _style(ax)
    return fig, axes


def _style(ax) -> None:
    ax.grid(True, color="#d9d9d9", linewidth=0.6)
    ax.set_axisbelow(True)
    ax.tick_params(labelsize=8.5)
    for side in ("top", "right"):
        ax.spines[side].set_color("#888888")


def _time_axis(ax) -> None:
    import matplotlib.dates as mdates

    locator = mdates.AutoDateLocator(minticks=4, maxticks=10)
    ax.xaxis.set_major_locator(locator)
    ax.xaxis.set_major_formatter(mdates.ConciseDateFormatter(locator))
    ax.set_xlabel("time [UTC]")


def _line_style(i: int) -> dict[str, Any]:
    return {
        "color": PALETTE[i % len(PALETTE)],
        "linestyle": LINESTYLES[i % len(LINESTYLES)],
        "marker": MARKERS[i % len(MARKERS)],
        "markersize": 4.5,
        "markerfacecolor": "white" if i % 2 else PALETTE[i % len(PALETTE)],
        "linewidth": 1.6,
    }


def _markevery(n: int) -> int:
    return max(1, n // 12)


# --------------------------------------------------------------------------- #
# what a run Dataset says about its layers


@dataclass(frozen=True)
class LayerBand:
    """One layer of a run, as drawn.

    Attributes
    ----------
    number : int
        1-based, from the inside.
    start, end : float
        Positions of its faces from the inside surface [m].
    label : str
        Layer name, with the material when the name does not say it.
    is_gap : bool
        An air gap (no cells, a resistance only).
    """

    number: int
    start: float
    end: float
    label: str
    is_gap: bool


def _need(ds: xr.Dataset, names: tuple[str, ...], source: str) -> None:
    for name in names:
        if name not in ds.variables:
            if name == "temperature" and "surface_temperature_outside" in ds.variables:
                raise CaseError(source, name, "this run kept no cell temperatures (keep_temperature = false under [time]); "
                                              "--kind surfaces draws what it kept")
            raise CaseError(source, name, "missing from the Dataset; is this a run written by 'layers run'?")


def layer_bands(ds: xr.Dataset) -> list[LayerBand]:
    """The layers of a run: face positions from ``layer_interface``, names from the run.

    A layer is labelled by its name (a ``layer_name`` variable, one entry
    per layer, air gaps included), with its material from the ``material``
    coordinate when the name does not say it; a layer with no cells is an
    air gap.  Runs that carry no ``layer_name`` (every run written so far)
    take the names from the case text stored with the run: a fallback that
    reads the ``[[layers]]`` entries' ``name`` and ``material`` only.

    Returns
    -------
    list of LayerBand
        From the inside to the outside.
    """
    layer = np.asarray(ds["layer"].values).astype(int)
    material = np.asarray(ds["material"].values).astype(str) if "material" in ds.coords else None
    if "layer_interface" in ds.variables:
        faces = np.asarray(ds["layer_interface"].values, dtype=float)
    else:  # a Dataset without layer faces: the layers' extent from their cells (no gaps known)
        bounds = cell_bounds(ds)
        faces = np.concatenate(([bounds[0, 0]], [bounds[np.flatnonzero(layer == n)[-1], 1] for n in np.unique(layer)]))
    count = faces.size - 1
    names = _layer_names(ds, count)
    bands = []
    for number in range(1, count + 1):
        cells = np.flatnonzero(layer == number)
        is_gap = cells.size == 0
        mat = "air gap" if is_gap else (str(material[cells[0]]) if material is not None else f"layer {number}")
        label = mat
        if names is not None:
            name, named_material = names[number - 1]
            if is_gap:
                label = name or "air gap"
            elif name:
                same = _norm(name) == _norm(named_material or mat) or not (named_material or mat)
                label = name if same else f"{name} ({named_material or mat})"
        bands.append(LayerBand(number, float(faces[number - 1]), float(faces[number]), label, is_gap))
    return bands


def _norm(text: str) -> str:
    return re.sub(r"[\s_\-]+", " ", text).strip().lower()


def _layer_names(ds: xr.Dataset, count: int) -> list[tuple[str, str]] | None:
    """Each layer's (name, material as named with it), or None when the run does not say.

    From the ``layer_name`` variable when the run has one (the material then
    comes from the ``material`` coordinate); else, as a fallback for runs
    written without it, from the ``[[layers]]`` entries of the stored case text.
    """
    if "layer_name" in ds.variables and ds["layer_name"].size == count:
        return [(str(n).strip(), "") for n in np.asarray(ds["layer_name"].values).ravel()]
    # Fallback for runs without layer_name: the names exist only in the case text.
    try:
        layers = tomllib.loads(str(ds.attrs["case"]))["layers"]
    except Exception:  # noqa: BLE001 - no or unreadable case text: label by the material coordinate
        return None
    if isinstance(layers, list):  # membranes carry no cells: the run's layers are the others
        layers = [s for s in layers if not (isinstance(s, dict) and s.get("kind") == "membrane")]
    if not isinstance(layers, list) or len(layers) != count or not all(isinstance(s, dict) for s in layers):
        return None
    return [(str(s.get("name") or "").strip(), str(s.get("material") or "").strip()) for s in layers]


def cell_bounds(ds: xr.Dataset) -> np.ndarray:
    """The faces of every cell as the solver used them [units of ``x``].

    Read from ``x_bounds`` (CF cell bounds, written with every run).  Only
    run files written before ``x_bounds`` existed have their faces
    reconstructed from the cell centres (:func:`_cell_bounds_from_centres`).

    Returns
    -------
    numpy.ndarray
        Shape (cells, 2): the inner and outer face of each cell.
    """
    if "x_bounds" in ds.variables:
        bounds = ds["x_bounds"]
        other = [d for d in bounds.dims if d != "x"]
        return np.asarray(bounds.transpose("x", *other).values, dtype=float)
    return _cell_bounds_from_centres(ds)


def _cell_bounds_from_centres(ds: xr.Dataset) -> np.ndarray:
    """FALLBACK for old run files without ``x_bounds``: cell faces rebuilt from the centres.

    Cell centres are midpoints of their faces, so within a layer each face
    follows from the previous one (``face[i+1] = 2 x[i] - face[i]``); the
    layer's first face is its ``layer_interface``.  If that does not give
    increasing faces (an unusual Dataset), midpoints between centres are used.
    """
    x = np.asarray(ds["x"].values, dtype=float)
    layer = np.asarray(ds["layer"].values).astype(int) if "layer" in ds.coords else np.ones_like(x, dtype=int)
    interfaces = np.asarray(ds["layer_interface"].values, dtype=float) if "layer_interface" in ds.variables else None
    lo = np.empty_like(x)
    hi = np.empty_like(x)
    ok = interfaces is not None
    if ok:
        for number in np.unique(layer):
            cells = np.flatnonzero(layer == number)
            if number - 1 >= interfaces.size:
                ok = False
                break
            face = interfaces[number - 1]
            for i in cells:
                lo[i] = face
                face = 2.0 * x[i] - face
                hi[i] = face
            if number < interfaces.size:
                hi[cells[-1]] = interfaces[number]
        ok = ok and bool(np.all(hi > lo)) and bool(np.all(lo[1:] >= hi[:-1] - 1e-12))
    if ok:
        return np.stack([lo, hi], axis=1)
    mid = 0.5 * (x[1:] + x[:-1])
    first = 0.0 if interfaces is None else interfaces[0]
    last = x[-1] + (x[-1] - mid[-1]) if x.size > 1 else 2 * x[0]
    if interfaces is not None:
        last = interfaces[-1]
    edges = np.concatenate(([first], mid, [last]))
    return np.stack([edges[:-1], edges[1:]], axis=1)


def _inner_radius(ds: xr.Dataset) -> float | None:
    """Radius of the inside surface [m] of a pipe or sphere, None when planar."""
    if "radius" not in ds.coords:
        return None
    return float(ds["radius"].values[0] - ds["x"].values[0])


def _margin_positions(centres: list[float], gap: float) -> list[float]:
    """Spread label positions (axes fraction) so neighbours are at least ``gap`` apart."""
    pos = list(centres)
    for _ in range(50):
        moved = False
        for i in range(1, len(pos)):
            if pos[i] - pos[i - 1] < gap:
                shift = (gap - (pos[i] - pos[i - 1])) / 2
                pos[i - 1] -= shift
                pos[i] += shift
                moved = True
        lo = min(pos) if pos else 0
        hi = max(pos) if pos else 1
        if lo < 0:
            pos = [p - lo for p in pos]
        if hi > 1:
            pos = [p - (hi - 1) for p in pos]
        if not moved:
            break
    return pos


# --------------------------------------------------------------------------- #
# the figures of a run


def _is_sizing(ds: xr.Dataset) -> bool:
    return "thickness" in ds.dims and "time" not in ds.dims


def _require_run(ds: xr.Dataset, source: str, kind: str) -> None:
    _refuse_sweep(ds, source, kind)
    if _is_sizing(ds):
        raise CaseError(source, "--kind", "this is a sizing Dataset (dimension thickness); plot it with --kind sizing")
    _need(ds, ("temperature",), source)


def plot_carpet(ds: xr.Dataset) -> Any:
    """Temperature over time and depth as a colour map.

    Time runs along the x axis, the distance from the inside surface [mm]
    up the y axis (pipes and spheres: the radius on a second scale), with a
    colour bar, the layer faces drawn as lines and the layers named in the
    right-hand margin.

    Parameters
    ----------
    ds : xarray.Dataset
        A run (:func:`layers.results.to_dataset`).

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib.dates as mdates
    import matplotlib.patheffects as pe

    source = str(ds.encoding.get("source", "run"))
    _require_run(ds, source, "carpet")
    temperature = ds["temperature"].transpose("time", "x")
    scale, depth_unit = _length_scale(_units(ds["x"], "m"))
    fig, (ax,) = new_figure(ds, "temperature through the construction")

    times = mdates.date2num(np.asarray(ds["time"].values).astype("datetime64[us]").astype(dt.datetime))
    if times.size > 1:
        t_edges = np.concatenate(([times[0]], 0.5 * (times[1:] + times[:-1]), [times[-1]]))
    else:
        t_edges = np.array([times[0] - 0.5 / 24, times[0] + 0.5 / 24])
    bounds = cell_bounds(ds) * scale
    values = np.ma.masked_invalid(np.asarray(temperature.values, dtype=float))
    vmin, vmax = (float(values.min()), float(values.max())) if values.count() else (0.0, 1.0)
    if vmin == vmax:
        vmin, vmax = vmin - 0.5, vmax + 0.5
    layer = np.asarray(ds["layer"].values).astype(int)
    mesh = None
    # one mesh per layer, so an air gap of finite thickness shows as a hatched band
    for number in np.unique(layer):
        cells = np.flatnonzero(layer == number)
        y_edges = np.concatenate((bounds[cells, 0], [bounds[cells[-1], 1]]))
        mesh = ax.pcolormesh(t_edges, y_edges, values[:, cells].T, cmap=CARPET_CMAP, vmin=vmin, vmax=vmax,
                             shading="flat", rasterized=True)
    bands = layer_bands(ds)
    total = bands[-1].end * scale
    ax.set_ylim(bands[0].start * scale, total)
    ax.set_xlim(t_edges[0], t_edges[-1])
    outline = [pe.Stroke(linewidth=2.6, foreground="black"), pe.Normal()]
    for band in bands:
        if band.is_gap and band.end > band.start:
            ax.axhspan(band.start * scale, band.end * scale, facecolor="white", edgecolor="#555555",
                       hatch=GAP_HATCH, linewidth=0)
    for face in sorted({b.start for b in bands[1:]} | {b.end for b in bands[:-1]}):
        ax.axhline(face * scale, color="white", linewidth=1.2, path_effects=outline)

    # layer names in the right margin, spread apart, with a leader to their band
    centres = [0.5 * (b.start + b.end) * scale / total for b in bands]
    places = _margin_positions(centres, 0.06)
    for band, centre, place in zip(bands, centres, places):
        ax.annotate(
            band.label, xy=(1.0, centre), xycoords="axes fraction", xytext=(1.03, place),
            textcoords="axes fraction", ha="left", va="center", fontsize=8.5,
            arrowprops={"arrowstyle": "-", "color": "#555555", "linewidth": 0.7, "shrinkA": 0, "shrinkB": 0},
            annotation_clip=False,
        )
    ax.set_ylabel(axis_label("distance from the inside surface", depth_unit))
    r0 = _inner_radius(ds)
    if r0 is not None:
        r0s = r0 * scale
        sec = ax.secondary_yaxis(-0.1, functions=(lambda d: d + r0s, lambda r: r - r0s))
        sec.set_ylabel(axis_label("radius", depth_unit))
        sec.tick_params(labelsize=8.5)
    _time_axis(ax)
    ax.grid(False)
    bar = fig.colorbar(mesh, ax=ax, pad=0.02, fraction=0.05, aspect=30)
    bar.set_label(axis_label("temperature", _units(ds["temperature"], "degC")))
    bar.ax.tick_params(labelsize=8.5)
    return fig


#: Colours of the surfaces plot, one per trace.  Own choice, in families: the
#: inside in blues and violet (navy surface, sky-blue air, teal sol-air, violet
#: dew point), the outside in warm colours (brick-red surface, orange air,
#: magenta sol-air, ochre dew point), the contents grey and the heat flows in
#: green and purple, so the outside surface, air and sol-air differ in hue and
#: lightness and not in shade only.
SURFACE_COLOURS = {
    "air_temperature_inside": "#5fb0e6",
    "surface_temperature_inside": "#1d3f73",
    "sol_air_temperature_inside": "#178a86",
    "dew_point_inside": "#7a68b0",
    "surface_temperature_outside": "#8a2f1e",
    "air_temperature_outside": "#e0902a",
    "sol_air_temperature_outside": "#c9509a",
    "dew_point_outside": "#9c7a1c",
    "contents_temperature": "#6b6b6b",
    "heat_flow_inside": "#2f8f4e",
    "heat_flow_outside": "#6a3d9a",
}

#: The lines of the surfaces plot: (variable, legend label, dash index, marker, filled).
#: One code throughout: the colour says the trace (:data:`SURFACE_COLOURS`),
#: the marker the side (circle inside, square outside, diamond the contents
#: of a pipe), the dash pattern the quantity (solid surface, dashed air,
#: dotted sol-air, long dash-dot-dot dew point, dash-dot heat flow), so no
#: two lines differ by colour alone.
_SURFACE_LINES = (
    ("air_temperature_inside", "inside air", 1, "o", False),
    ("surface_temperature_inside", "inside surface", 0, "o", True),
    ("sol_air_temperature_inside", "inside sol-air", 3, "o", False),
    ("surface_temperature_outside", "outside surface", 0, "s", True),
    ("air_temperature_outside", "outside air", 1, "s", False),
    ("sol_air_temperature_outside", "outside sol-air", 3, "s", False),
    ("dew_point_inside", "inside dew point", 4, "o", False),
    ("dew_point_outside", "outside dew point", 4, "s", False),
    ("contents_temperature", "contents of the bore", 0, "D", True),
)
_FLOW_LINES = (
    ("heat_flow_inside", "heat flow, inside surface", 2, "^", False),
    ("heat_flow_outside", "heat flow, outside surface", 4, "v", False),
)

#: A surfaces plot (the whole run, or the window ``--from`` / ``--to``) that
#: spans at least this long is drawn as daily bands (shaded from the daily
#: minimum to the daily maximum, the daily mean as a line) instead of every
#: sample: an hourly trace of three weeks or more is a solid band at 10 in.
DAILY_BANDS_FROM = np.timedelta64(21, "D")
#: A day (UTC) enters the daily bands only with at least this fraction of the
#: usual number of samples in a day, so a part-day at either end of the run
#: does not draw a band of a few hours as if it were a day.
DAY_COVERAGE = 0.5
#: A heat flow's first samples are off scale when they lie further outside the
#: axis the rest would get (its range, zero included) than this many times that
#: axis: a start from a given temperature, or a periodic start that does not
#: meet the first drive, that would squeeze the rest into a thin line.
SPIKE_RATIO = 0.5
#: At most this many leading samples are left out of the heat-flow scale.
SPIKE_SAMPLES = 3


def _coded_line(name: str, dash: int, marker: str, filled: bool) -> dict[str, Any]:
    colour = SURFACE_COLOURS[name]
    return {
        "color": colour,
        "linestyle": LINESTYLES[dash],
        "marker": marker,
        "markersize": 4.5,
        "markerfacecolor": colour if filled else "white",
        "linewidth": 1.6,
    }


def _window_bound(text: str, option: str, source: str) -> np.datetime64:
    """An ISO 8601 date or time of ``--from`` / ``--to`` as UTC [datetime64 s]."""
    try:
        when = dt.datetime.fromisoformat(str(text).strip())
    except ValueError:
        raise CaseError(source, option, f"cannot read {text!r} as an ISO 8601 date or time "
                                        "(e.g. 2026-07-01 or 2026-07-01T06:00, UTC)") from None
    if when.tzinfo is not None:
        when = when.astimezone(dt.timezone.utc).replace(tzinfo=None)
    return np.datetime64(when, "s")


def select_window(ds: xr.Dataset, start: str | None, end: str | None, source: str = "run") -> xr.Dataset:
    """The part of a run between ``start`` and ``end`` (both kept, UTC).

    Parameters
    ----------
    ds : xarray.Dataset
        A run.
    start, end : str or None
        ISO 8601 dates or times (``2026-07-01``, ``2026-07-01T06:00``; an
        offset such as ``+02:00`` is converted to UTC, a time without one is
        UTC).  None: the run's first (last) output time.
    source : str
        The run file, for messages.

    Returns
    -------
    xarray.Dataset
        The run on the output times in the window.

    Raises
    ------
    CaseError
        A bound that cannot be read (key ``--from`` or ``--to``), lies
        outside the run, or a window that is empty.
    """
    if start is None and end is None:
        return ds
    stamps = np.asarray(ds["time"].values).astype("datetime64[s]")
    first, last = stamps[0], stamps[-1]
    span = f"the run is {np.datetime_as_string(first, unit='m')} to {np.datetime_as_string(last, unit='m')} UTC"
    lo = _window_bound(start, "--from", source) if start is not None else first
    hi = _window_bound(end, "--to", source) if end is not None else last
    if start is not None and lo > last:
        raise CaseError(source, "--from", f"{start} is after the end of the run; {span}")
    if end is not None and hi < first:
        raise CaseError(source, "--to", f"{end} is before the start of the run; {span}")
    if start is not None and end is not None and hi <= lo:
        raise CaseError(source, "--to", f"{end} is not after --from {start}; the window is empty")
    keep = np.flatnonzero((stamps >= lo) & (stamps <= hi))
    if keep.size < 2:
        raise CaseError(source, "--from" if start is not None else "--to",
                        f"the window {np.datetime_as_string(lo, unit='m')} to {np.datetime_as_string(hi, unit='m')} UTC "
                        f"holds {'no output time' if keep.size == 0 else 'one output time only'}; {span}")
    return ds.isel(time=slice(int(keep[0]), int(keep[-1]) + 1))


@dataclass(frozen=True)
class DailyBands:
    """Daily (UTC) extremes and mean of one quantity.

    Attributes
    ----------
    day : numpy.ndarray of datetime64
        Noon of each day drawn (UTC).
    low, mean, high : numpy.ndarray
        Daily minimum, mean and maximum [units of the quantity].
    """

    day: np.ndarray
    low: np.ndarray
    mean: np.ndarray
    high: np.ndarray


def daily_bands(time: np.ndarray, values: np.ndarray) -> DailyBands:
    """Daily minimum, mean and maximum of a series, by UTC day.

    Days with fewer samples than :data:`DAY_COVERAGE` of the usual count (a
    part-day at either end) are left out; NaN samples are skipped.

    Parameters
    ----------
    time : numpy.ndarray of datetime64
        Sorted output times (UTC).
    values : numpy.ndarray
        The series [any unit].

    Returns
    -------
    DailyBands
    """
    stamps = np.asarray(time).astype("datetime64[s]")
    values = np.asarray(values, dtype=float)
    days = stamps.astype("datetime64[D]")
    starts = np.flatnonzero(np.concatenate(([True], days[1:] != days[:-1])))
    counts = np.diff(np.concatenate((starts, [days.size])))
    finite = np.isfinite(values)
    safe = np.where(finite, values, 0.0)
    n = np.add.reduceat(finite.astype(int), starts)
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = np.add.reduceat(safe, starts) / n
    low = np.fmin.reduceat(np.where(finite, values, np.nan), starts)
    high = np.fmax.reduceat(np.where(finite, values, np.nan), starts)
    full = (counts >= DAY_COVERAGE * np.median(counts)) & (n > 0)
    noon = days[starts] + np.timedelta64(12, "h")
    return DailyBands(noon[full], low[full], mean[full], high[full])


def leading_spike(values: np.ndarray) -> int:
    """How many of a heat flow's first samples are off scale (0 to :data:`SPIKE_SAMPLES`).

    A first sample is off scale when it lies further outside the axis the
    samples after the first :data:`SPIKE_SAMPLES` would get (their range with
    zero, which the heat-flow axis always shows) than :data:`SPIKE_RATIO`
    times that axis: the jump of a start from a given temperature, or of a
    periodic start that does not meet the first drive.  The following
    samples are counted while they are off scale too.

    Parameters
    ----------
    values : numpy.ndarray
        A heat flow [W m-2, W m-1 or W].

    Returns
    -------
    int
    """
    values = np.asarray(values, dtype=float)
    rest = values[SPIKE_SAMPLES:]
    rest = rest[np.isfinite(rest)]
    if rest.size < 4 * SPIKE_SAMPLES:
        return 0
    lo, hi = min(float(rest.min()), 0.0), max(float(rest.max()), 0.0)
    reach = SPIKE_RATIO * max(hi - lo, 1e-9)
    count = 0
    for value in values[:SPIKE_SAMPLES]:
        if not math.isfinite(value) or lo - reach <= value <= hi + reach:
            break
        count += 1
    return count


def _flow_limits(kept: list[np.ndarray]) -> tuple[float, float]:
    """Axis limits that show every kept heat-flow sample, zero included, with a margin."""
    joined = np.concatenate([k[np.isfinite(k)] for k in kept] + [np.zeros(1)])
    lo, hi = float(joined.min()), float(joined.max())
    pad = 0.06 * (hi - lo) if hi > lo else 1.0
    return lo - pad, hi + pad


def _mark_off_scale(ax, time0: Any, value: float, count: int, units: str, colour: str,
                    limits: tuple[float, float]) -> None:
    """An arrow at the top or bottom edge where a heat flow's first sample is off scale, with its value."""
    above = value > limits[1]
    edge = 1.0 if above else 0.0
    shown = f"{value + 0.0:,.0f}" if abs(value) >= 100 else f"{value + 0.0:.3g}"
    what = "off scale" if count == 1 else f"first {count} samples off scale"
    text = f"start: {shown} {pretty_units(units)} ({what})"
    ax.annotate(text, xy=(time0, edge), xycoords=("data", "axes fraction"),
                xytext=(28, -26 if above else 26), textcoords="offset points", ha="left",
                va="top" if above else "bottom", fontsize=8, color=colour, annotation_clip=False, zorder=5,
                bbox={"facecolor": "white", "edgecolor": "none", "alpha": 0.85, "pad": 1.0},
                arrowprops={"arrowstyle": "-|>", "color": colour, "linewidth": 1.0, "shrinkA": 0, "shrinkB": 0})


def plot_surfaces(ds: xr.Dataset, start: str | None = None, end: str | None = None) -> Any:
    """Air and surface temperatures on both sides, and the heat flows, over time.

    Temperatures (air, sol-air, surfaces, dew points and the contents of a
    pipe's bore, each where the run has it) and the heat flows through the
    inside and outside surfaces (positive from inside to outside).  A span
    shorter than :data:`DAILY_BANDS_FROM` shows every sample, the heat flows
    on a right-hand axis; a longer one shows daily bands (:func:`daily_bands`:
    shaded from the daily minimum to the maximum, the mean as a line), the
    heat flows in a panel of their own below the temperatures.  Heat-flow
    samples at the start that are far off the rest (:func:`leading_spike`)
    are left out of the heat-flow scale (and the bands) and marked at the
    axis edge with their value.

    Parameters
    ----------
    ds : xarray.Dataset
        A run.
    start, end : str, optional
        ISO 8601 dates or times (UTC) of a window of the run to draw (see
        :func:`select_window`); default the whole run.

    Returns
    -------
    matplotlib.figure.Figure

    Raises
    ------
    CaseError
        A sweep or sizing Dataset (key ``--kind``), a run without surface
        temperatures, or a window that cannot be read or holds no output time.
    """
    source = str(ds.encoding.get("source", "run"))
    _refuse_sweep(ds, source, "surfaces")
    if _is_sizing(ds):
        raise CaseError(source, "--kind", "this is a sizing Dataset (dimension thickness); plot it with --kind sizing")
    _need(ds, ("surface_temperature_inside", "surface_temperature_outside"), source)
    whole_start = np.asarray(ds["time"].values)[0]
    ds = select_window(ds, start, end, source)
    stamps = np.asarray(ds["time"].values).astype("datetime64[us]")
    time = stamps.astype(dt.datetime)
    banded = stamps.size > 2 and (stamps[-1] - stamps[0]) >= DAILY_BANDS_FROM and (
        np.median(np.diff(stamps)) < np.timedelta64(12, "h"))
    # the start's jump is looked for only where the drawn samples begin with the run's first
    from_run_start = np.asarray(ds["time"].values)[0] == whole_start
    flows = [f for f in _FLOW_LINES if f[0] in ds.variables]
    spikes = {name: leading_spike(ds[name].values) if from_run_start else 0 for name, *_ in flows}

    what = "surface temperatures and heat flows"
    if start is not None or end is not None:
        what += (f", {np.datetime_as_string(stamps[0], unit='m').replace('T', ' ')} to "
                 f"{np.datetime_as_string(stamps[-1], unit='m').replace('T', ' ')} UTC")
    if banded:
        what += "; daily bands (UTC): shaded min to max, line the mean"
    if any(spikes.values()):
        what += "; first heat-flow sample off scale"
    if banded and flows:
        fig, (ax, flow_ax) = new_figure(ds, what, nrows=2, sharex=True)
        fig.get_layout_engine().set(hspace=0.03)
        gs = ax.get_subplotspec().get_gridspec()
        gs.set_height_ratios([2.2, 1.0])
    else:
        fig, (ax,) = new_figure(ds, what)
        flow_ax = None
    every = _markevery(time.size)
    handles, labels = [], []
    t_units = None
    for name, label, *code in _SURFACE_LINES:
        if name not in ds.variables:
            continue
        da = ds[name]
        t_units = t_units or _units(da, "degC")
        kw = _coded_line(name, *code)
        if name.startswith("surface_temperature"):
            kw["zorder"] = 2.6  # the surfaces, the run's own result, above the drives they follow
        if banded:
            handles.append(_draw_band(ax, stamps, np.asarray(da.values, dtype=float), label, kw))
        else:
            (line,) = ax.plot(time, da.values, label=label, markevery=every, **kw)
            handles.append(line)
        labels.append(label)
    ax.set_ylabel(axis_label("temperature", t_units or "degC"))
    if flows:
        f_units = _units(ds[flows[0][0]])
        if flow_ax is None:
            right = ax.twinx()
            right.tick_params(labelsize=8.5)
            suffix = " (right axis)"
        else:
            right = flow_ax
            suffix = ""
        kept = []
        for name, label, *code in flows:
            kw = _coded_line(name, *code)
            kw.update(linewidth=1.3, markersize=4)
            values = np.asarray(ds[name].values, dtype=float)
            skip = spikes[name]
            kept.append(values[skip:])
            if banded:
                shown = values.copy()
                shown[:skip] = np.nan  # the start's jump would stretch the first day's band
                handles.append(_draw_band(right, stamps, shown, f"{label}{suffix}", kw))
            else:
                (line,) = right.plot(time, values, label=f"{label}{suffix}", markevery=every, **kw)
                handles.append(line)
            labels.append(f"{label}{suffix}")
        right.axhline(0.0, color="#999999", linewidth=0.8, linestyle=(0, (1, 3)))
        limits = _flow_limits(kept)
        right.set_ylim(*limits)
        for name, *_ in flows:
            if spikes[name]:
                # on the axes drawn on top (the temperatures' when the flows share their frame), so no line hides it
                _mark_off_scale(ax if flow_ax is None else right, time[0], float(ds[name].values[0]), spikes[name],
                                f_units, SURFACE_COLOURS[name], limits)
        flow_label = axis_label("heat flow, positive outward", f_units)
        right.set_ylabel(flow_label if flow_ax is None else flow_label.replace(", ", ",\n", 1))
        if flow_ax is None:
            # keep the temperature lines drawn above the flows' axis background
            right.set_zorder(ax.get_zorder() - 1)
            ax.patch.set_visible(False)
        else:
            ax.set_xlabel("")
    _time_axis(flow_ax if flow_ax is not None else ax)
    if flow_ax is not None:
        ax.tick_params(labelbottom=False)
        ax.set_xlabel("")
    ax.set_xlim(time[0], time[-1])
    if banded:
        # below the panels, inside the figure: the layout keeps it clear of the axes and the caution strip
        # below the time axis of the lower panel, inside the figure (the layout makes room for it)
        (flow_ax or ax).legend(handles=handles, labels=labels, loc="upper center", bbox_to_anchor=(0.5, 0.0),
                               borderaxespad=4.0, ncols=min(4, len(handles)), fontsize=8.5, frameon=False)
    else:
        ax.legend(handles=handles, labels=labels, loc="upper center", bbox_to_anchor=(0.5, -0.11), ncols=min(4, len(handles)),
                  fontsize=8.5, frameon=False)
    return fig


def _draw_band(ax, stamps: np.ndarray, values: np.ndarray, label: str, kw: dict[str, Any]) -> Any:
    """One quantity as daily bands: the min-max band shaded, the mean a coded line; its legend handle."""
    bands = daily_bands(stamps, values)
    days = bands.day.astype("datetime64[us]").astype(dt.datetime)
    # a light fill with a thin edge of its own colour, so each band's reach shows where bands overlap
    patch = ax.fill_between(days, bands.low, bands.high, facecolor=kw["color"], alpha=0.14, linewidth=0,
                            label=f"_band {label}", gid="daily band")
    for edge in (bands.low, bands.high):
        ax.plot(days, edge, color=kw["color"], linewidth=0.5, alpha=0.7, label="_band edge")
    (line,) = ax.plot(days, bands.mean, label=label, markevery=_markevery(days.size), **kw)
    return (patch, line)


def plot_comparison(combined: xr.Dataset, labels: list[str]) -> Any:
    """Overlay of several runs: both surface temperatures and the inside heat flow.

    Parameters
    ----------
    combined : xarray.Dataset
        Runs along a ``run`` dimension on common time stamps, as
        :func:`layers.comparison.compare_runs` builds them.
    labels : list of str
        One legend entry per run.

    Returns
    -------
    matplotlib.figure.Figure
    """
    panels = (
        ("surface_temperature_outside", "outside surface"),
        ("surface_temperature_inside", "inside surface"),
        ("heat_flow_inside", "inside heat flow"),
    )
    what = f"{combined.sizes['run']} runs over their common window; heat flow positive outward"
    fig, axes = new_figure(combined, what, nrows=3, sharex=True)
    time = np.asarray(combined["time"].values).astype("datetime64[us]").astype(dt.datetime)
    every = _markevery(time.size)
    for ax, (name, quantity) in zip(axes, panels):
        da = combined[name]
        for i in range(combined.sizes["run"]):
            ax.plot(time, da.values[i], label=labels[i], markevery=every, **_line_style(i))
        default = "degC" if "temperature" in name else None
        ax.set_ylabel(axis_label(quantity, _units(da, default)), fontsize=8.5)
    _time_axis(axes[-1])
    for ax in axes[:-1]:
        ax.set_xlabel("")
    # long labels (many differing keys) get one column, wrapped, so none is cut off
    wrapped = ["\n".join(textwrap.wrap(label, 90)) or label for label in labels]
    columns = 1 if max(len(label) for label in labels) > 45 else min(3, len(labels))
    for line, text in zip(axes[-1].lines, wrapped):
        line.set_label(text)
    axes[-1].legend(loc="upper center", bbox_to_anchor=(0.5, -0.35), ncols=columns, fontsize=7.5, frameon=False)
    return fig


def select_times(ds: xr.Dataset, times: list[str] | None, count: int = 5, source: str = "run") -> np.ndarray:
    """Indices of the output times to draw.

    Parameters
    ----------
    ds : xarray.Dataset
        A run.
    times : list of str or None
        ISO 8601 times (``2026-07-21T15:00``; a ``Z`` or ``+02:00`` offset is
        converted to UTC, a time without one is UTC); items may also be
        comma-separated.  None or empty: ``count`` evenly spaced times.
    count : int
        How many times when none are given.
    source : str
        The run file, for messages.

    Returns
    -------
    numpy.ndarray of int
        Indices into ``ds.time``, nearest output time to each request.

    Raises
    ------
    CaseError
        A time that cannot be read or lies outside the run.
    """
    stamps = np.asarray(ds["time"].values).astype("datetime64[s]")
    if not times:
        return np.unique(np.linspace(0, stamps.size - 1, min(count, stamps.size)).round().astype(int))
    items = [part.strip() for item in times for part in str(item).split(",") if part.strip()]
    if stamps.size > 1:
        slack = np.max(np.diff(stamps)) / 2
    else:
        slack = np.timedelta64(0, "s")
    picked = []
    for item in items:
        try:
            when = dt.datetime.fromisoformat(item)
        except ValueError:
            raise CaseError(source, "--times", f"cannot read {item!r} as an ISO 8601 time (e.g. 2026-07-21T15:00)") from None
        if when.tzinfo is not None:
            when = when.astimezone(dt.timezone.utc).replace(tzinfo=None)
        t = np.datetime64(when, "s")
        if t < stamps[0] - slack or t > stamps[-1] + slack:
            raise CaseError(
                source, "--times",
                f"{item} is outside the run ({np.datetime_as_string(stamps[0], unit='m')} to "
                f"{np.datetime_as_string(stamps[-1], unit='m')} UTC)",
            )
        picked.append(int(np.argmin(np.abs(stamps - t))))
    return np.array(list(dict.fromkeys(picked)), dtype=int)


def plot_profiles(ds: xr.Dataset, times: list[str] | None = None) -> Any:
    """Temperature against the distance from the inside surface at chosen times.

    Each profile runs from the inside surface temperature through the cell
    centres to the outside surface temperature.  The layers are shaded in
    alternating light greys (air gaps hatched) and named along the top.

    Parameters
    ----------
    ds : xarray.Dataset
        A run.
    times : list of str, optional
        ISO 8601 times (see :func:`select_times`); default five evenly spaced
        output times.

    Returns
    -------
    matplotlib.figure.Figure
    """
    source = str(ds.encoding.get("source", "run"))
    _require_run(ds, source, "profiles")
    index = select_times(ds, times, source=source)
    scale, depth_unit = _length_scale(_units(ds["x"], "m"))
    fig, (ax,) = new_figure(ds, "temperature profiles")
    bands = layer_bands(ds)
    x = np.asarray(ds["x"].values, dtype=float) * scale
    has_surfaces = "surface_temperature_inside" in ds.variables and "surface_temperature_outside" in ds.variables
    depth = np.concatenate(([bands[0].start * scale], x, [bands[-1].end * scale])) if has_surfaces else x
    temperature = ds["temperature"].transpose("time", "x")
    stamps = np.asarray(ds["time"].values).astype("datetime64[m]")
    for k, i in enumerate(index):
        profile = np.asarray(temperature.values[i], dtype=float)
        if has_surfaces:
            profile = np.concatenate(([float(ds["surface_temperature_inside"].values[i])], profile,
                                      [float(ds["surface_temperature_outside"].values[i])]))
        label = np.datetime_as_string(stamps[i], unit="m").replace("T", " ") + " UTC"
        ax.plot(depth, profile, label=label, markevery=_markevery(depth.size), **_line_style(k))
    total = bands[-1].end * scale
    ax.set_xlim(bands[0].start * scale, total)
    transform = ax.get_xaxis_transform()
    solid = 0
    for band in bands:
        lo, hi = band.start * scale, band.end * scale
        if band.is_gap:
            if hi > lo:
                ax.axvspan(lo, hi, facecolor="white", edgecolor="#8c8c8c", hatch=GAP_HATCH, linewidth=0, zorder=0)
        else:
            ax.axvspan(lo, hi, facecolor=BAND_FILLS[solid % 2], edgecolor="none", zorder=0)
            solid += 1
        ax.axvline(hi, color="#8c8c8c", linewidth=0.8, zorder=0.5)
        narrow = (hi - lo) / total < 0.12
        ax.text(0.5 * (lo + hi) if hi > lo else lo, 0.985, band.label, transform=transform, ha="center", va="top",
                rotation=90 if narrow else 0, fontsize=8, color="#333333", clip_on=True,
                bbox={"facecolor": "white", "edgecolor": "none", "alpha": 0.7, "pad": 1.5})
    ax.set_xlabel(axis_label("distance from the inside surface", depth_unit))
    ax.set_ylabel(axis_label("temperature", _units(ds["temperature"], "degC")))
    low, high = ax.get_ylim()
    ax.set_ylim(low, high + 0.18 * (high - low))  # room for the layer names
    r0 = _inner_radius(ds)
    if r0 is not None:
        r0s = r0 * scale
        sec = ax.secondary_xaxis("top", functions=(lambda d: d + r0s, lambda r: r - r0s))
        sec.set_xlabel(axis_label("radius", depth_unit))
        sec.tick_params(labelsize=8.5)
    ax.legend(loc="best", fontsize=8.5, framealpha=0.9, title="time", title_fontsize=8.5)
    return fig


# --------------------------------------------------------------------------- #
# sizing


def _number(value: Any) -> float | None:
    """A limit attribute as a float, None when absent or unreadable."""
    if value is None:
        return None
    if isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(value, bool):
        value = float(value)
        return value if math.isfinite(value) else None
    if isinstance(value, np.ndarray) and value.size == 1:
        return _number(value.item())
    match = re.match(r"^\s*([-+]?(\d+\.?\d*|\.\d+)([eE][-+]?\d+)?)", str(value))
    return float(match.group(1)) if match else None


def _per_thickness(da: xr.DataArray) -> tuple[np.ndarray, str]:
    """Values along ``thickness``; other dimensions reduced by their maximum."""
    extra = [d for d in da.dims if d != "thickness"]
    if extra:
        return np.asarray(da.max(dim=extra).values, dtype=float), " (maximum)"
    return np.asarray(da.values, dtype=float), ""


def _flow_word(values: np.ndarray) -> str:
    """"heat loss" for heat flowing out through the construction (positive, from
    inside to outside), "heat gain" where it flows in (a chilled line or a cold
    store), "heat flow" where the candidates differ in direction."""
    finite = np.asarray(values, dtype=float)[np.isfinite(values)]
    if finite.size and np.all(finite <= 0.0) and np.any(finite < 0.0):
        return "heat gain"
    if finite.size and np.any(finite < 0.0):
        return "heat flow (magnitude)"
    return "heat loss"


def plot_sizing(ds: xr.Dataset) -> Any:
    """Outside surface temperature, heat loss (and freeze time) against insulation thickness.

    The limits found among the attributes are drawn as horizontal lines:
    ``max_surface_temperature`` and ``dew_point`` [same units as
    ``surface_temperature_outside``], ``max_heat_loss`` [units of
    ``heat_flow``], ``min_freeze_time_h`` [h]; with ``dew_point_margin``
    [K] also the dew point plus the margin.  The heat loss is the magnitude
    of ``heat_flow``, as the budget bounds it.  Candidates that pass every
    criterion (``passes_all``, else every ``passes_<criterion>``) are filled
    markers, others open; the attribute
    ``recommended_thickness`` [units of ``thickness``] is marked by a
    vertical line.  Optional variables and attributes may be absent.

    Parameters
    ----------
    ds : xarray.Dataset
        A sizing Dataset (dimension ``thickness``) from ``layers size``.

    Returns
    -------
    matplotlib.figure.Figure
    """
    source = str(ds.encoding.get("source", "sizing"))
    _refuse_sweep(ds, source, "sizing")
    if "thickness" not in ds.dims:
        raise CaseError(source, "--kind", "sizing needs a Dataset from 'layers size' (dimension thickness)")
    panels = [name for name in ("surface_temperature_outside", "heat_flow") if name in ds.variables]
    freeze = [name for name in ("freeze_time", "time_to_freezing") if name in ds.variables]
    if freeze:
        panels.append("freeze")
    if not panels:
        raise CaseError(source, "surface_temperature_outside",
                        "a sizing Dataset needs surface_temperature_outside, heat_flow or freeze_time")
    fig, axes = new_figure(ds, "insulation sizing", nrows=len(panels), sharex=True)
    scale, unit = _length_scale(_units(ds["thickness"], "m"))
    thickness = np.asarray(ds["thickness"].values, dtype=float) * scale

    criteria = [name for name in ds.data_vars if name.startswith("passes_") and ds[name].dims == ("thickness",)]
    if "passes_all" in criteria:
        passes = np.asarray(ds["passes_all"].values).astype(bool)
    elif criteria:
        passes = np.logical_and.reduce([np.asarray(ds[name].values).astype(bool) for name in criteria])
    else:
        passes = None

    def draw(ax, values: np.ndarray, label: str, colour: int, style: int) -> None:
        kw = _line_style(style)
        kw.update(color=PALETTE[colour], marker=None)
        ax.plot(thickness, values, label=label, **kw)
        marker = MARKERS[style % len(MARKERS)]
        if passes is None:
            ax.plot(thickness, values, linestyle="none", marker=marker, color=PALETTE[colour], markersize=6)
        else:
            ax.plot(thickness[passes], values[passes], linestyle="none", marker=marker, color=PALETTE[colour],
                    markersize=6.5)
            ax.plot(thickness[~passes], values[~passes], linestyle="none", marker=marker, color=PALETTE[colour],
                    markerfacecolor="white", markersize=6.5)

    def limit(ax, value: float | None, label: str, colour: int, dashes) -> None:
        if value is None:
            return
        ax.axhline(value, color=PALETTE[colour], linewidth=1.3, linestyle=dashes, label=label)

    for ax, panel in zip(axes, panels):
        if panel == "surface_temperature_outside":
            da = ds[panel]
            values, note = _per_thickness(da)
            t_units = _units(da, "degC")
            draw(ax, values, "outside surface" + note, 0, 0)
            top = _number(ds.attrs.get("max_surface_temperature"))
            limit(ax, top, f"touch limit {top:g} {pretty_units(t_units)}" if top is not None else "", 3, (0, (6, 2)))
            dew = _number(ds.attrs.get("dew_point"))
            if dew is None and "dew_point" in ds.variables and ds["dew_point"].size == 1:
                dew = _number(ds["dew_point"].values)
            limit(ax, dew, f"dew point {dew:.1f} {pretty_units(t_units)}" if dew is not None else "", 2, (0, (1.5, 1.5)))
            margin = _number(ds.attrs.get("dew_point_margin"))
            if dew is not None and margin:
                limit(ax, dew + margin, f"dew point + {margin:g} K margin", 2, (0, (6, 2)))
            ax.set_ylabel(axis_label("surface temperature", t_units))
        elif panel == "heat_flow":
            da = ds[panel]
            values, note = _per_thickness(da)
            f_units = _units(da)
            # the budget bounds the magnitude; a chilled line gains heat (negative flow, inward)
            flow_word = _flow_word(values)
            values = np.abs(values)
            draw(ax, values, flow_word + note, 1, 1)
            cap = _number(ds.attrs.get("max_heat_loss"))
            budget = {"heat loss": "heat-loss budget", "heat gain": "heat-gain budget"}.get(flow_word, "heat-flow budget")
            limit(ax, cap, f"{budget} {cap:g} {pretty_units(f_units)}" if cap is not None else "", 3,
                  (0, (6, 2)))
            ax.set_ylabel(axis_label(flow_word, f_units))
        else:
            shown = False
            for k, name in enumerate(freeze):
                da = ds[name]
                values, note = _per_thickness(da)
                f_units = _units(da, "h")
                finite = np.isfinite(values)
                if not finite.any():
                    continue
                values = np.where(finite, values, np.nan)
                label = {"freeze_time": "time to the ice-fraction limit",
                         "time_to_freezing": "time until the contents reach 0 °C"}[name]
                draw(ax, values, label + note, 2 + 2 * k, 2 + k)
                shown = True
            least = _number(ds.attrs.get("min_freeze_time_h"))
            if least is None:
                least = _number(ds.attrs.get("min_freeze_time"))
            limit(ax, least, f"required {least:g} h" if least is not None else "", 3, (0, (6, 2)))
            units = _units(ds[freeze[0]], "h")
            ax.set_ylabel(axis_label("freeze time", units))
            if not shown:
                ax.text(0.5, 0.5, "no freezing within the run", transform=ax.transAxes, ha="center", va="center",
                        fontsize=9, color="#444444")

    recommended = _number(ds.attrs.get("recommended_thickness"))
    if recommended is not None:
        for ax in axes:
            ax.axvline(recommended * scale, color="#222222", linewidth=1.4, linestyle=(0, (3, 1, 1, 1)),
                       label=f"recommended {recommended * scale:g} {unit}" if ax is axes[0] else None)
    elif "recommended_thickness" in ds.attrs or (passes is not None and not passes.any()):
        axes[0].text(0.99, 0.97, "no candidate passes every criterion", transform=axes[0].transAxes, ha="right",
                     va="top", fontsize=9, color=PALETTE[3], fontweight="bold")
    if passes is not None:
        from matplotlib.lines import Line2D

        key = [Line2D([], [], linestyle="none", marker="o", color="#333333", label="passes every criterion"),
               Line2D([], [], linestyle="none", marker="o", color="#333333", markerfacecolor="white",
                      label="fails a criterion")]
    else:
        key = []
    for i, ax in enumerate(axes):
        handles, _ = ax.get_legend_handles_labels()
        if i == 0:
            handles = handles + key
        # beside the panel, where it cannot hide a candidate
        ax.legend(handles=handles, fontsize=8, loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False,
                  borderaxespad=0.0)
    axes[-1].set_xlabel(axis_label("insulation thickness", unit))
    return fig


# --------------------------------------------------------------------------- #
# sweeps


#: The per-point variable a sweep map shows unless asked for another.
SWEEP_DEFAULT = "heat_flow_inside_mean"
#: Most cells of a sweep map whose values are written in them.
SWEEP_ANNOTATE_CELLS = 150
#: Most points of a one-dimensional sweep whose values are written beside them.
SWEEP_ANNOTATE_POINTS = 12
#: Most tick labels along one axis of a sweep map (every swept value up to this).
SWEEP_MAX_TICKS = 16
#: Plot area of a one-panel figure with a colour bar, about [pt] (for fitting the cell labels).
_MAP_AREA = (560.0, 270.0)
_PINT_POWER = re.compile(r"([A-Za-zµ])(\d+)")


def is_sweep(ds: xr.Dataset) -> bool:
    """Whether ``ds`` was written by ``layers sweep`` (attribute ``product``, or a swept coordinate)."""
    return str(ds.attrs.get("product", "")) == "sweep" or bool(sweep_dimensions(ds))


def sweep_dimensions(ds: xr.Dataset) -> list[str]:
    """The sweep dimensions of ``ds``, in the order of the case's ``[[sweep]]`` tables.

    A sweep dimension has a coordinate whose ``long_name`` is ``"swept <key>"``;
    the order is that of the ``sweep_dimensions`` attribute (``name = key (n
    values); ...``), else that of the file.
    """
    found = [d for d in ds.dims
             if d in ds.coords and str(ds[d].attrs.get("long_name", "")).startswith("swept ")]
    listed = [part.split("=")[0].strip() for part in str(ds.attrs.get("sweep_dimensions", "")).split(";")]
    ordered = [d for d in listed if d in found]
    return ordered + [d for d in found if d not in ordered]


def sweep_variables(ds: xr.Dataset) -> list[str]:
    """The variables a sweep map can show: numbers on sweep dimensions only (the per-point figures)."""
    dims = set(sweep_dimensions(ds))
    return [name for name, da in ds.data_vars.items()
            if da.dims and set(da.dims) <= dims and da.dtype.kind in "fiu"]


def _refuse_sweep(ds: xr.Dataset, source: str, kind: str) -> None:
    """A run or sizing figure asked of a sweep file: one line saying what to use instead."""
    if is_sweep(ds):
        dims = " x ".join(sweep_dimensions(ds)) or "its sweep dimensions"
        drawn = "a file from 'layers size'" if kind == "sizing" else "a single run"
        raise CaseError(source, "--kind", f"this is a sweep Dataset (a run per point of {dims}) and --kind {kind} draws "
                                          f"{drawn}; use --kind sweep (the default for a sweep file)")


def _written_units(units: str) -> str:
    """A unit as the case file writes it (``mm``, ``W/(m*K)``, ``m2*K/W``) shown for a reader:
    ``*`` as ``·``, powers as superscripts; CF spellings go through :func:`pretty_units`."""
    units = str(units).strip()
    if not any(c in units for c in "*/()^"):
        return pretty_units(units)
    text = units.replace("**", "^").replace("*", "·").replace(" ", "")
    text = re.sub(r"\^(\d)", lambda m: _SUPERSCRIPT.get(m.group(1), m.group(1)), text)
    text = _PINT_POWER.sub(lambda m: m.group(1) + "".join(_SUPERSCRIPT.get(c, c) for c in m.group(2)), text)
    for word, shown in _TEMPERATURE_UNITS.items():
        text = re.sub(rf"\b{word}\b", shown, text)
    return text


def _swept_label(ds: xr.Dataset, name: str) -> str:
    """Axis label of a sweep dimension: its name, the case key it sets, its unit."""
    coord = ds[name]
    key = str(coord.attrs.get("long_name", ""))[len("swept "):].strip()
    quantity = name if not key or key == name else f"{name} ({key})"
    if "units" in coord.attrs:
        return f"{quantity} [{_written_units(coord.attrs['units'])}]"
    if coord.dtype.kind in "fiu":
        # bare numbers in the case file are read in SI (temperatures in degC)
        return f"{quantity} [SI]"
    return quantity  # words (a material, a scheme): no unit


def _value_texts(values: np.ndarray) -> list[str]:
    """Swept values as tick labels: text as it is, numbers with the fewest
    significant digits (3 at least) that keep every value distinct."""
    if values.dtype.kind not in "fiu":
        return [str(v) for v in values]
    numbers = np.asarray(values, dtype=float)
    for digits in range(3, 16):
        texts = [f"{v:.{digits}g}" for v in numbers]
        if len(set(texts)) == len(texts):
            return texts
    return [repr(float(v)) for v in numbers]


def _scaled(values: np.ndarray, units: str) -> tuple[np.ndarray, str]:
    """Large energies and powers with an SI prefix (J m-2 -> kJ m-2, MJ m-2, GJ m-2),
    so cell labels and colour-bar ticks stay short [values, CF unit]."""
    tokens = str(units).split()
    finite = np.abs(values[np.isfinite(values)])
    if not tokens or tokens[0] not in ("J", "W", "Wh") or finite.size == 0:
        return values, units
    largest = float(finite.max())
    for prefix, factor in (("G", 1e9), ("M", 1e6), ("k", 1e3)):
        if largest >= 10.0 * factor:
            return values / factor, " ".join([prefix + tokens[0], *tokens[1:]])
    return values, units


def _cell_format(values: np.ndarray) -> str:
    """One format for every cell label: three significant digits of the largest
    value, in powers of ten when the values are very large or very small."""
    finite = np.abs(values[np.isfinite(values)])
    largest = float(finite.max()) if finite.size else 0.0
    if largest == 0.0:
        return "{:.0f}"
    if largest >= 1e5 or largest < 1e-3:
        return "{:.1e}"
    return "{:.%df}" % max(0, 2 - math.floor(math.log10(largest)))


def _cell_text(fmt: str, value: float) -> str:
    if not math.isfinite(value):
        return "no value"
    text = fmt.format(value)
    return "0" if re.fullmatch(r"-?0(\.0*)?", text) else text


def _thin_ticks(n: int) -> np.ndarray:
    """Tick positions (indices) along an axis of ``n`` swept values: all of them, or evenly thinned."""
    if n <= SWEEP_MAX_TICKS:
        return np.arange(n)
    step = math.ceil((n - 1) / (SWEEP_MAX_TICKS - 1))
    return np.arange(0, n, step)  # the first value always; the last too when the step divides n - 1


def _text_colour(rgba) -> str:
    """Black or white, whichever reads better on a cell of colour ``rgba`` (WCAG relative luminance)."""
    def channel(c: float) -> float:
        return c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4

    r, g, b = (channel(float(c)) for c in rgba[:3])
    luminance = 0.2126 * r + 0.7152 * g + 0.0722 * b
    return "black" if luminance > 0.18 else "white"


def _sweep_figure(ds: xr.Dataset, variable: str | None, source: str) -> str:
    """The per-point variable to draw: ``variable``, else :data:`SWEEP_DEFAULT`,
    else the first one the file has; a name the file cannot map is a one-line error."""
    allowed = sweep_variables(ds)
    if not allowed:
        raise CaseError(source, "--variable", "the sweep Dataset has no variable on its sweep dimensions only")
    if variable is None:
        return SWEEP_DEFAULT if SWEEP_DEFAULT in allowed else allowed[0]
    if variable not in allowed:
        if variable in ds.coords:
            why = f"{variable!r} is a coordinate, not a result per point"
        elif variable in ds.variables:
            extra = [d for d in ds[variable].dims if d not in sweep_dimensions(ds)]
            if extra:
                why = f"{variable!r} is not one number per point (it also runs along {', '.join(extra)})"
            elif not ds[variable].dims:
                why = f"{variable!r} is a single number, not one per point"
            else:
                why = f"{variable!r} is not numeric"
        else:
            why = f"unknown variable {variable!r}"
        raise CaseError(source, "--variable", f"{why}; choose one of {', '.join(allowed)}")
    return variable


def plot_sweep(ds: xr.Dataset, variable: str | None = None) -> Any:
    """A per-point figure of a sweep over its first two sweep dimensions, as a map.

    Each cell is one point of the grid, coloured (``cividis``) by the
    variable and, for grids of up to :data:`SWEEP_ANNOTATE_CELLS` cells, with
    its value written in it; the first sweep dimension runs along the x axis,
    the second up the y axis, each tick a swept value.  A one-dimensional
    sweep is drawn as a line with markers against the swept value.  With
    three or more dimensions the others are held at their first value, and
    the subtitle says so.

    Parameters
    ----------
    ds : xarray.Dataset
        A sweep Dataset from ``layers sweep`` (attribute ``product = "sweep"``).
    variable : str, optional
        A variable on the sweep dimensions only (e.g. ``heat_flow_inside_mean``
        [W m-2 for a wall], ``heat_in_inside_total`` [J m-2],
        ``energy_balance_error`` [-]); default ``heat_flow_inside_mean``.

    Returns
    -------
    matplotlib.figure.Figure

    Raises
    ------
    CaseError
        A Dataset that is not a sweep (key ``--kind``) or a variable it
        cannot map (key ``--variable``, with the names it can).
    """
    source = str(ds.encoding.get("source", "sweep"))
    dims = sweep_dimensions(ds)
    if not dims:
        raise CaseError(source, "--kind", "sweep needs a Dataset from 'layers sweep' (a swept coordinate)")
    name = _sweep_figure(ds, variable, source)
    da = ds[name]
    for d in dims:  # a variable that does not change along a dimension: the same value on it
        if d not in da.dims:
            da = da.expand_dims({d: ds[d].values})
    shown, held = dims[:2], dims[2:]
    da = da.isel({d: 0 for d in held}).transpose(*shown)
    values, units = _scaled(np.asarray(da.values, dtype=float), _units(da, "1"))
    quantity = str(da.attrs.get("long_name") or name.replace("_", " "))
    points = int(np.prod([ds.sizes[d] for d in dims]))
    what = f"sweep of {points} points: {name}"
    if held:
        fixed = ", ".join(f"{d} = {_value_texts(np.asarray(ds[d].values))[0]}"
                          + (f" {_written_units(ds[d].attrs['units'])}" if "units" in ds[d].attrs else "") for d in held)
        what += f"; other dimensions at their first value: {fixed}"
    fig, (ax,) = new_figure(ds, what)
    if len(shown) == 1:
        _sweep_line(ax, ds, shown[0], values, units, quantity)
    else:
        _sweep_map(fig, ax, ds, shown, values, units, quantity)
    return fig


def _wrapped(quantity: str, units: str, width: int) -> str:
    """``axis_label`` wrapped to lines of about ``width`` characters (the unit stays at the end)."""
    return "\n".join(textwrap.wrap(axis_label(quantity, units), width)) or axis_label(quantity, units)


def _sweep_line(ax, ds: xr.Dataset, dim: str, values: np.ndarray, units: str, quantity: str) -> None:
    """A one-dimensional sweep: the variable against the swept value, one marker per point."""
    coord = np.asarray(ds[dim].values)
    numeric = coord.dtype.kind in "fiu"
    x = coord.astype(float) if numeric else np.arange(coord.size, dtype=float)
    kw = _line_style(0)
    kw.update(markersize=6)
    if not numeric:  # words (materials, schemes) have no order between them: markers only
        kw.update(linestyle="none", markersize=8)
    ax.plot(x, values, **kw)
    if not numeric or coord.size <= SWEEP_MAX_TICKS:
        ax.set_xticks(x, _value_texts(coord))
    if not numeric:
        ax.set_xlim(-0.5, coord.size - 0.5)
    if coord.size <= SWEEP_ANNOTATE_POINTS:
        fmt = _cell_format(values)
        for xi, yi in zip(x, values):
            if math.isfinite(yi):
                # on a white patch above its marker, so a steep line cannot run through the digits
                ax.annotate(_cell_text(fmt, float(yi)), (xi, yi), xytext=(0, 8), textcoords="offset points",
                            ha="center", va="bottom", fontsize=8, color="#333333", zorder=3,
                            bbox={"facecolor": "white", "edgecolor": "none", "alpha": 0.9, "pad": 1.0})
        low, high = ax.get_ylim()
        ax.set_ylim(low, high + 0.08 * (high - low))  # room for the top labels
    _rotate_if_crowded(ax, _value_texts(coord) if (not numeric or coord.size <= SWEEP_MAX_TICKS) else [])
    ax.set_xlabel(_swept_label(ds, dim))
    ax.set_ylabel(_wrapped(quantity, units, 60))


def _rotate_if_crowded(ax, texts: list[str], room: float = 95.0) -> None:
    """Tilt the x tick labels when side by side they would need more than ``room`` characters."""
    if texts and sum(len(t) + 2 for t in texts) > room:
        for label in ax.get_xticklabels():
            label.set_rotation(30)
            label.set_ha("right")
            label.set_rotation_mode("anchor")


def _sweep_map(fig, ax, ds: xr.Dataset, shown: list[str], values: np.ndarray, units: str, quantity: str) -> None:
    """Two sweep dimensions: one cell per point, the first dimension across, the second up."""
    nx, ny = values.shape
    grid = np.ma.masked_invalid(values.T)  # rows: the second dimension
    finite = values[np.isfinite(values)]
    vmin, vmax = (float(finite.min()), float(finite.max())) if finite.size else (0.0, 1.0)
    if vmin == vmax:
        vmin, vmax = vmin - 0.5, vmax + 0.5
    ax.set_facecolor("#eeeeee")  # points without a value show as light grey
    mesh = ax.pcolormesh(np.arange(nx + 1) - 0.5, np.arange(ny + 1) - 0.5, grid, cmap=CARPET_CMAP, vmin=vmin,
                         vmax=vmax, shading="flat", edgecolors="white", linewidth=0.6)
    ax.grid(False)
    ax.set_xlim(-0.5, nx - 0.5)
    ax.set_ylim(-0.5, ny - 0.5)
    x_texts = _value_texts(np.asarray(ds[shown[0]].values))
    y_texts = _value_texts(np.asarray(ds[shown[1]].values))
    xt, yt = _thin_ticks(nx), _thin_ticks(ny)
    ax.set_xticks(xt, [x_texts[i] for i in xt])
    ax.set_yticks(yt, [y_texts[i] for i in yt])
    ax.tick_params(length=0)
    _rotate_if_crowded(ax, [x_texts[i] for i in xt])
    ax.set_xlabel(_swept_label(ds, shown[0]))
    ax.set_ylabel(_swept_label(ds, shown[1]))
    if nx * ny <= SWEEP_ANNOTATE_CELLS:
        fmt = _cell_format(values)
        texts = [[_cell_text(fmt, float(values[i, j])) for j in range(ny)] for i in range(nx)]
        longest = max(len(t) for row in texts for t in row)
        # the largest type (up to 9 pt) that fits the cell: a character is about 0.6 of the type size wide
        size = min(9.0, _MAP_AREA[0] / nx / (0.62 * longest + 0.8), _MAP_AREA[1] / ny / 1.8)
        if size >= 5.0:
            colours = mesh.cmap(mesh.norm(values))
            for i in range(nx):
                for j in range(ny):
                    ok = math.isfinite(values[i, j])
                    ax.text(i, j, texts[i][j], ha="center", va="center", fontsize=size,
                            color=_text_colour(colours[i, j]) if ok else "#555555")
    bar = fig.colorbar(mesh, ax=ax, pad=0.02, fraction=0.05, aspect=30)
    bar.set_label(_wrapped(quantity, units, 50), fontsize=9)
    bar.ax.tick_params(labelsize=8.5)


# --------------------------------------------------------------------------- #
# ISO 13788 condensation

_MONTHS = ("Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec")


def _condensation_months(ds: xr.Dataset) -> list[int]:
    """The months drawn in the pressure panel (0-based): the coldest, the
    starting month, the month of the largest accumulation and the warmest,
    each once, in the order of the calculation year."""
    t_e = np.asarray(ds["air_temperature_outside"].values, dtype=float)
    first = int(ds.attrs.get("first_month", 0) or 0)
    chosen = [int(np.argmin(t_e))]
    if first:
        chosen.append(first - 1)
    peak = int(ds.attrs.get("max_accumulated_moisture_month", 0) or 0)
    if peak:
        chosen.append(peak - 1)
    chosen.append(int(np.argmax(t_e)))
    start = first - 1 if first else 0
    unique = sorted(set(chosen), key=lambda m: (m - start) % 12)
    return unique


def plot_condensation(ds: xr.Dataset) -> Any:
    """ISO 13788 Glaser diagram and the moisture balance by month.

    Top: vapour pressure (solid) and saturation vapour pressure (dashed)
    against the cumulative diffusion-equivalent air layer thickness s_d from
    the inside surface, for a few months (the coldest, the starting month,
    the month of the largest accumulation, the warmest); the layers are
    shaded bands named at the top, condensation planes marked.  Bottom: the
    moisture accumulated at each condensing interface at the end of each
    month [g/m2], months in the order of the calculation from the starting
    month, with the verdict.

    Parameters
    ----------
    ds : xarray.Dataset
        From ``layers condensation`` (``product = "condensation"``).

    Returns
    -------
    matplotlib.figure.Figure
    """
    source = str(ds.encoding.get("source", "condensation"))
    need = ("vapour_pressure", "saturation_vapour_pressure", "accumulated_moisture", "equivalent_air_thickness")
    for name in need:
        if name not in ds.variables:
            raise CaseError(source, name, "missing: is this a Dataset written by 'layers condensation'?")
    fig, axes = new_figure(ds, "ISO 13788 monthly interstitial condensation (Glaser method)", nrows=2)
    ax, bx = axes
    s = np.asarray(ds["equivalent_air_thickness"].values, dtype=float)
    p = np.asarray(ds["vapour_pressure"].values, dtype=float)
    psat = np.asarray(ds["saturation_vapour_pressure"].values, dtype=float)
    acc = np.asarray(ds["accumulated_moisture"].values, dtype=float) * 1000.0
    rate = np.asarray(ds["condensation_rate"].values, dtype=float)
    names = [str(v) for v in ds["layer_name"].values] if "layer_name" in ds.variables else [""] * (s.size - 1)
    # layer bands, named where there is room, numbered where not
    span = s[-1] - s[0] if s[-1] > s[0] else 1.0
    narrow = []
    for k in range(s.size - 1):
        ax.axvspan(s[k], s[k + 1], color=BAND_FILLS[k % 2], zorder=0, linewidth=0)
        middle = 0.5 * (s[k] + s[k + 1])
        if (s[k + 1] - s[k]) / span >= 0.12:
            text = names[k]
        else:
            text = str(k + 1)
            narrow.append(f"{k + 1} {names[k]}")
        ax.text(middle, 1.01, text, transform=ax.get_xaxis_transform(), ha="center", va="bottom", fontsize=7.5,
                color="#444444", clip_on=False)
    months = _condensation_months(ds)
    for i, m in enumerate(months):
        colour = PALETTE[i % len(PALETTE)]
        ax.plot(s, p[m], color=colour, linewidth=1.8, marker=MARKERS[i % len(MARKERS)], markersize=4)
        ax.plot(s, psat[m], color=colour, linewidth=1.3, linestyle=(0, (5, 2)))
        planes = np.flatnonzero(np.abs(rate[m]) > 0)
        if planes.size:
            ax.plot(s[planes], p[m, planes], linestyle="none", marker="o", markersize=9, markerfacecolor="none",
                    markeredgecolor=colour, markeredgewidth=1.6)
    ax.set_xlim(s[0], s[-1])
    ax.set_xlabel(axis_label("cumulative diffusion-equivalent air layer thickness s_d from the inside", "m"))
    ax.set_ylabel(axis_label("water vapour pressure", "Pa"))
    from matplotlib.lines import Line2D

    handles = [Line2D([], [], color=PALETTE[i % len(PALETTE)], marker=MARKERS[i % len(MARKERS)], markersize=4,
                      linewidth=1.8, label=_MONTHS[m]) for i, m in enumerate(months)]
    handles += [Line2D([], [], color="#555555", linewidth=1.8, label="vapour pressure p"),
                Line2D([], [], color="#555555", linewidth=1.3, linestyle=(0, (5, 2)), label="saturation p_sat")]
    if any(np.abs(rate[m]).max() > 0 for m in months):
        handles.append(Line2D([], [], linestyle="none", marker="o", markersize=9, markerfacecolor="none",
                              markeredgecolor="#333333", label="condensation plane"))
    if narrow:  # layers too thin on the s_d axis for their name above the frame
        handles.append(Line2D([], [], linestyle="none", label="thin layers: " + "; ".join(narrow)))
    # beside the frame, where no pressure line runs
    ax.legend(handles=handles, fontsize=7.5, loc="upper left", bbox_to_anchor=(1.01, 1.0), framealpha=0.9)

    first = int(ds.attrs.get("first_month", 0) or 0)
    order = [(first - 1 + k) % 12 for k in range(12)] if first else list(range(12))
    active = [k for k in range(acc.shape[1]) if (acc[:, k] > 0).any()]
    labels = [str(v) for v in ds["interface_name"].values] if "interface_name" in ds.variables else [str(k) for k in range(s.size)]
    positions = np.arange(12)
    if active:
        width = 0.8 / len(active)
        for j, k in enumerate(active):
            bx.bar(positions - 0.4 + width * (j + 0.5), acc[order, k], width=width * 0.95, color=PALETTE[j % len(PALETTE)],
                   hatch=("", "//", "..", "xx", "\\\\")[j % 5], edgecolor="white", label=f"interface {k}: {labels[k]}")
        bx.legend(fontsize=7.5, loc="upper left", bbox_to_anchor=(1.01, 1.0), framealpha=0.9)
    else:
        bx.text(0.5, 0.5, "no interface condenses in any month", transform=bx.transAxes, ha="center", va="center",
                fontsize=10, color="#444444")
        bx.set_ylim(0, 1)
    bx.set_xticks(positions, [_MONTHS[m] for m in order])
    bx.set_xlim(-0.6, 11.6)
    bx.set_xlabel("month (from the ISO 13788 starting month)" if first else "month")
    bx.set_ylabel(axis_label("accumulated moisture", "g m-2"))
    verdict = str(ds.attrs.get("verdict", ""))
    peak = float(ds.attrs.get("max_accumulated_moisture", 0.0)) * 1000.0
    note = f"verdict: {verdict}" + (f"; largest {peak:.0f} g/m²" if peak > 0 else "")
    bx.set_title(note, loc="left", fontsize=9, fontweight="bold", color=PALETTE[3] if verdict == "accumulates" else "#222222")
    return fig


# --------------------------------------------------------------------------- #
# command line


PLOTTERS = {"carpet": plot_carpet, "surfaces": plot_surfaces, "profiles": plot_profiles, "sizing": plot_sizing,
            "sweep": plot_sweep, "condensation": plot_condensation}


def plot(ds: xr.Dataset, kind: str, times: list[str] | None = None, variable: str | None = None,
         start: str | None = None, end: str | None = None) -> Any:
    """The figure of one ``kind`` (``carpet``, ``surfaces``, ``profiles``, ``sizing`` or ``sweep``;
    ``times`` for profiles, ``variable`` for sweep, the window ``start`` / ``end`` for surfaces)."""
    if kind not in PLOTTERS:
        raise ValueError(f"kind must be one of {KINDS}, got {kind!r}")
    if kind == "surfaces":
        return plot_surfaces(ds, start, end)
    if kind == "profiles":
        return plot_profiles(ds, times)
    if kind == "sweep":
        return plot_sweep(ds, variable)
    return PLOTTERS[kind](ds)


def output_path(run: str | os.PathLike, kind: str, out: str | os.PathLike | None = None) -> Path:
    """Where a plot goes: ``out``, else ``<run stem>-<kind>.png`` next to the run
    (``-2``, ``-3``... when that name is taken).

    Raises
    ------
    CaseError
        An unknown extension, or a file that exists already (key ``-o``).
    """
    if not out:
        # next to the run, under the first free name: <stem>-<kind>.png, -2.png, ...
        stem = f"{Path(run).stem}-{kind}"
        for n in range(1, 10000):
            path = Path(run).with_name(f"{stem}.png" if n == 1 else f"{stem}-{n}.png")
            if not path.exists():
                return path
        raise CaseError(str(path), "-o", "no free default name; choose a name with -o")
    path = Path(out)
    if path.suffix.lower() not in FORMATS:
        raise CaseError(str(path), "-o", f"unknown figure format {path.suffix or '(none)'!r}; use .png, .svg or .pdf")
    if path.exists():
        raise exists_error(path)
    return path


def save_figure(fig: Any, path: str | os.PathLike, metadata: dict[str, str] | None = None) -> Path:
    """Save ``fig`` in the format its extension names, never overwriting a file.

    The figure is written under a temporary name in the same folder and then
    hard-linked into place, which fails if the name exists meanwhile.

    Raises
    ------
    FileExistsError
        If ``path`` exists.
    """
    path = Path(path)
    fmt = FORMATS.get(path.suffix.lower())
    if fmt is None:
        raise ValueError(f"unknown figure format {path.suffix!r}; use .png, .svg or .pdf")
    meta = dict(metadata or {})
    keys = {"png": ("Title", "Description", "Software"),
            "svg": ("Title", "Description", "Creator"),
            "pdf": ("Title", "Subject", "Creator")}[fmt]
    info = dict(zip(keys, (meta.get("title", ""), meta.get("caution", ""), f"layers {__version__}")))
    info = {k: v for k, v in info.items() if v}
    return write_once(path, lambda tmp: fig.savefig(tmp, format=fmt, dpi=DPI, metadata=info))


def open_run(path: str | os.PathLike) -> xr.Dataset:
    """Open a run or sizing Dataset for plotting (loaded, the file closed).

    Raises
    ------
    CaseError
        A missing file or one that is not netCDF (key ``run``).
    """
    from layers.results import read_netcdf

    return read_netcdf(path, "run")


def plot_file(
    run: str | os.PathLike, kind: str | None = None, out: str | os.PathLike | None = None, times: list[str] | None = None,
    variable: str | None = None, start: str | None = None, end: str | None = None,
) -> Path:
    """Draw one figure of a run, sizing or sweep file and save it, never over a file.

    Parameters
    ----------
    run : str or Path
        A netCDF file written by ``layers run``, ``layers size`` or ``layers sweep``.
    kind : str, optional
        ``carpet``, ``surfaces``, ``profiles``, ``sizing`` or ``sweep``; default
        ``sweep`` for a sweep file, ``sizing`` for a sizing file, else ``surfaces``.
    out : str or Path, optional
        The figure file (.png, .svg, .pdf); default next to the run (see
        :func:`output_path`).
    times : list of str, optional
        ISO 8601 times for ``profiles``.
    variable : str, optional
        For ``sweep``: the variable on the sweep dimensions to map (default
        ``heat_flow_inside_mean``).
    start, end : str, optional
        For ``surfaces``: ISO 8601 dates or times (UTC) of the window to draw
        (``--from`` / ``--to``; see :func:`select_window`).

    Returns
    -------
    Path
        The file written.

    Raises
    ------
    CaseError
        For an unreadable run, a kind that does not fit the file, a variable
        a sweep map cannot show, or an ``out`` that exists or has an unknown
        extension.
    """
    _use_agg()
    ds = open_run(run)
    product = str(ds.attrs.get("product", "run"))
    if product == "comparison" or "run" in ds.dims:
        raise CaseError(str(run), "(file)", "is a comparison Dataset; draw it with `layers compare RUN_A.nc RUN_B.nc -o OUT.png`")
    if product == "periodic":
        raise CaseError(str(run), "(file)", "holds ISO 13786 characteristics (numbers, no time series); `layers periodic CASE.toml` prints them")
    if product == "condensation" or kind == "condensation":
        if product != "condensation":
            raise CaseError(str(run), "--kind", "condensation needs a Dataset from 'layers condensation'")
        if (kind or "condensation") != "condensation":
            raise CaseError(str(run), "--kind", "this is an ISO 13788 condensation Dataset; use --kind condensation")
        for option, value in (("--times", times), ("--variable", variable), ("--from", start), ("--to", end)):
            if value:
                raise CaseError(str(run), option, "does not apply to --kind condensation")
        target = output_path(run, "condensation", out)
        fig = plot_condensation(ds)
        try:
            return save_figure(fig, target, {"title": str(ds.attrs.get("title", "")), "caution": _caution(ds)})
        except FileExistsError:
            raise exists_error(target) from None
    sweep = is_sweep(ds)
    kind = kind or ("sweep" if sweep else "sizing" if _is_sizing(ds) else "surfaces")
    if kind not in KINDS:
        raise CaseError(str(run), "--kind", f"unknown kind {kind!r}; choose one of {', '.join(KINDS)}")
    if sweep and kind != "sweep":
        _refuse_sweep(ds, str(run), kind)
    if kind == "sweep" and not sweep:
        what = "a sizing Dataset (use --kind sizing)" if _is_sizing(ds) else "a single run (use --kind surfaces, carpet or profiles)"
        raise CaseError(str(run), "--kind", f"sweep needs a Dataset from 'layers sweep'; this is {what}")
    if variable is not None and kind != "sweep":
        raise CaseError(str(run), "--variable", "only --kind sweep uses --variable")
    for option, value in (("--from", start), ("--to", end)):
        if value is not None and kind != "surfaces":
            raise CaseError(str(run), option, f"only --kind surfaces uses {option}")
    if kind == "sweep":
        _sweep_figure(ds, variable, str(run))  # a name the map cannot show is refused before any file is named
    target = output_path(run, kind, out)
    if _is_sizing(ds) and kind != "sizing":
        raise CaseError(str(run), "--kind", "this is a sizing Dataset (dimension thickness); use --kind sizing")
    if times and kind != "profiles":
        raise CaseError(str(run), "--times", "only --kind profiles uses --times")
    if kind == "surfaces" and not sweep and not _is_sizing(ds):
        select_window(ds, start, end, str(run))  # a bad window is refused before the figure is drawn
    fig = plot(ds, kind, times, variable, start, end)
    try:
        return save_figure(fig, target, {"title": str(ds.attrs.get("title", "")), "caution": _caution(ds)})
    except FileExistsError:
        raise exists_error(target) from None


__all__ = [
    "CARPET_CMAP", "DPI", "FIGSIZE", "KINDS", "LINESTYLES", "MARKERS", "PALETTE",
    "LayerBand", "axis_label", "cell_bounds", "is_sweep", "layer_bands", "new_figure", "open_run", "output_path",
    "plot", "plot_carpet", "plot_comparison", "plot_condensation", "plot_file", "plot_profiles", "plot_sizing", "plot_surfaces", "plot_sweep",
    "DAILY_BANDS_FROM", "SURFACE_COLOURS", "DailyBands", "daily_bands", "leading_spike", "select_window",
    "pretty_units", "save_figure", "select_times", "sweep_dimensions", "sweep_variables",
]
