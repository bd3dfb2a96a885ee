"""The catalogue of an archive folder: ``layers list``, and the headline attributes it reads.

``layers list`` reads netCDF *headers* only (through :mod:`netCDF4`, without
xarray), so a folder of a thousand runs answers in well under two seconds.
The headline results it shows are global attributes written with each run
(:func:`headline_attributes`); for runs written before those attributes
existed it falls back to reading the two small time series it needs.
Entries are kept in a header cache outside the archive (:func:`cache_dir`).

What makes a netCDF file a layers run (:func:`not_a_run`) is decided here,
for the catalogue and for :mod:`layers.comparison` alike.

Library functions return dataclasses and text; only :mod:`layers.cli` prints.
"""

from __future__ import annotations

import contextlib
import dataclasses
import datetime as dt
import hashlib
import json
import math
import os
import tempfile
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from layers.errors import CaseError
from layers.formatting import display_units, format_duration, format_utc

if TYPE_CHECKING:  # xarray is not imported: `layers list` does not need it
    import xarray as xr

#: Prefix of the headline-result global attributes of a run.
SUMMARY_PREFIX = "summary_"

#: Global attributes without which a netCDF file is not a layers run.
RUN_ATTRIBUTES = ("geometry", "created", "case_sha256")
#: Variables without which a netCDF file is not a layers run.
RUN_VARIABLES = ("time", "surface_temperature_outside", "heat_flow_inside")

#: Environment variable naming the folder of the ``layers list`` header cache.
CACHE_ENV = "LAYERS_CACHE_DIR"
#: Version of the cache file layout; a cache of another version is ignored.
CACHE_FORMAT = 4

# --------------------------------------------------------------------------- #
# headline attributes (written with each run)


def headline_attributes(ds: xr.Dataset) -> dict[str, float | str]:
    """Headline results of a run as global attributes, for listing without data.

    Parameters
    ----------
    ds : xarray.Dataset
        A run as :func:`layers.results.to_dataset` builds it (``time``,
        ``surface_temperature_inside``, ``surface_temperature_outside``,
        ``heat_flow_inside``; attributes ``heat_in_inside_total`` and
        ``heat_total_units`` when present).

    Returns
    -------
    dict
        ``summary_time_start``, ``summary_time_end`` : str
            First and last time stamp, UTC ISO 8601.
        ``summary_duration_s`` : float
            [s]
        ``summary_surface_temperature_outside_max_degC``,
        ``summary_surface_temperature_outside_min_degC``,
        ``summary_surface_temperature_inside_max_degC``,
        ``summary_surface_temperature_inside_min_degC`` : float
            Extremes over the kept samples [degC].
        ``summary_heat_flow_inside_mean`` : float
            Mean heat flow through the inside surface, positive outward
            [``summary_heat_flow_inside_mean_units``: W m-2, W m-1 or W].
            It is the run's total heat through the inside surface
            (``heat_in_inside_total``, summed from the scheme's own fluxes at
            every step) over the duration; without that attribute, the
            trapezoidal mean of the kept samples.
        ``summary_heat_flow_inside_mean_units`` : str
    """
    seconds = (ds["time"].values - ds["time"].values[0]) / np.timedelta64(1, "s")
    flow = ds["heat_flow_inside"]
    return headline_values(
        seconds=seconds.astype(float),
        start=format_utc(ds["time"].values[0]),
        end=format_utc(ds["time"].values[-1]),
        outside=ds["surface_temperature_outside"].values,
        inside=ds["surface_temperature_inside"].values if "surface_temperature_inside" in ds else None,
        flow=flow.values,
        flow_units=str(flow.attrs.get("units", "")),
        heat_in_total=ds.attrs.get("heat_in_inside_total"),
    )


def headline_values(
    *,
    seconds: np.ndarray,
    start: str,
    end: str,
    outside: np.ndarray,
    inside: np.ndarray | None,
    flow: np.ndarray | None,
    flow_units: str,
    heat_in_total: float | None,
) -> dict[str, float | str]:
    """The headline attributes from plain arrays (shared by the Dataset and the header reader)."""
    duration = float(seconds[-1] - seconds[0]) if len(seconds) else 0.0
    out: dict[str, float | str] = {
        f"{SUMMARY_PREFIX}time_start": start,
        f"{SUMMARY_PREFIX}time_end": end,
        f"{SUMMARY_PREFIX}duration_s": duration,
        f"{SUMMARY_PREFIX}surface_temperature_outside_max_degC": float(np.nanmax(outside)),
        f"{SUMMARY_PREFIX}surface_temperature_outside_min_degC": float(np.nanmin(outside)),
    }
    if inside is not None:
        out[f"{SUMMARY_PREFIX}surface_temperature_inside_max_degC"] = float(np.nanmax(inside))
        out[f"{SUMMARY_PREFIX}surface_temperature_inside_min_degC"] = float(np.nanmin(inside))
    if heat_in_total is not None and duration > 0:
        mean = float(heat_in_total) / duration
    elif flow is not None and duration > 0:
        mean = float(np.trapezoid(flow, seconds) / duration)
    elif flow is not None:
        mean = float(flow[0])
    else:
        mean = math.nan
    out[f"{SUMMARY_PREFIX}heat_flow_inside_mean"] = mean
    out[f"{SUMMARY_PREFIX}heat_flow_inside_mean_units"] = flow_units
    return out


# --------------------------------------------------------------------------- #
# list


@dataclass(frozen=True)
class ArchiveEntry:
    """One file of an archive folder, as ``layers list`` shows it.

    Every field but ``path`` is None when the file is unreadable or not a
    layers run; ``problem`` then says why.

    Attributes
    ----------
    path : Path
    title, label, created, case_sha256, geometry : str or None
        The run's global attributes (``created`` is UTC ISO 8601).
    start, end : str or None
        First and last time stamp, UTC ISO 8601.
    duration_s : float or None
        [s]
    surface_temperature_outside_max, surface_temperature_outside_min : float or None
        [degC]
    surface_temperature_inside_max, surface_temperature_inside_min : float or None
        [degC]
    heat_flow_inside_mean : float or None
        Positive outward [``heat_flow_units``].
    heat_flow_units : str or None
        ``W m-2`` (planar), ``W m-1`` (cylinder), ``W`` (sphere).
    headline_source : str or None
        ``"attributes"`` (the run's summary attributes) or ``"variables"``
        (read from the small time series of an older run).
    problem : str or None
        Why the file is not listed as a run.
    product : str or None
        What the file is: ``run``, ``sweep``, ``sizing``, ``periodic`` or
        ``comparison``; None for a foreign or unreadable file.
    points : int or None
        The number of points of a sweep (its headline figures are the
        extremes over all of them, and the mean over them of the mean heat flow).
    """

    path: Path
    title: str | None = None
    label: str | None = None
    created: str | None = None
    case_sha256: str | None = None
    geometry: str | None = None
    start: str | None = None
    end: str | None = None
    duration_s: float | None = None
    surface_temperature_outside_max: float | None = None
    surface_temperature_outside_min: float | None = None
    surface_temperature_inside_max: float | None = None
    surface_temperature_inside_min: float | None = None
    heat_flow_inside_mean: float | None = None
    heat_flow_units: str | None = None
    headline_source: str | None = None
    problem: str | None = None
    product: str | None = None
    points: int | None = None

    @property
    def is_run(self) -> bool:
        return self.problem is None

    def to_json(self) -> dict[str, Any]:
        """A JSON-ready dict: the path as text, NaN as null, units in the key names."""
        out: dict[str, Any] = {"file": str(self.path), "name": self.path.name}
        for f in dataclasses.fields(self):
            if f.name == "path":
                continue
            value = getattr(self, f.name)
            if isinstance(value, float) and not math.isfinite(value):
                value = None
            key = f.name
            if key.startswith("surface_temperature"):
                key += "_degC"
            out[key] = value
        return out


#: Fields of an entry kept in the header cache (all but ``path``).
_ENTRY_FIELDS = [f.name for f in dataclasses.fields(ArchiveEntry) if f.name != "path"]


#: What ``layers list`` calls the other products of layers (global attribute
#: ``product``, or, for files written before it, a telling variable).
OTHER_PRODUCTS = {
    "sizing": ("passes_all", "a sizing result (layers size), not a run"),
    "periodic": ("periodic_transmittance", "dynamic characteristics (layers periodic), not a run"),
    "comparison": (None, "a comparison of runs (layers compare), not a run"),  # only by its attribute
    "condensation": ("accumulated_moisture", "an interstitial condensation check (layers condensation), not a run"),
}


def not_a_run(attrs: Sequence[str], variables: Sequence[str], product: str | None = None) -> str | None:
    """Why a readable netCDF file is not a layers run, or None if it is one.

    Parameters
    ----------
    attrs : sequence of str
        The names of the file's global attributes.
    variables : sequence of str
        The names of its variables.
    product : str, optional
        Its ``product`` attribute (``run``, ``sizing``, ``periodic``,
        ``condensation``, ``comparison``); files written before the attribute are told by a
        variable only that product has.

    Returns
    -------
    str or None
        A reason for the user, or None for a run.
    """
    for name, (variable, reason) in OTHER_PRODUCTS.items():
        if product == name or (product is None and variable is not None and variable in variables):
            return reason
    missing_attrs = [a for a in RUN_ATTRIBUTES if a not in attrs]
    if missing_attrs:
        return "not a layers run (no " + ", ".join(repr(a) for a in missing_attrs) + " attribute)"
    missing_vars = [v for v in RUN_VARIABLES if v not in variables]
    if missing_vars:
        return "not a layers run: no " + ", ".join(repr(v) for v in missing_vars) + " variable (a sizing, periodic or condensation result?)"
    return None


def read_entry(path: str | os.PathLike) -> ArchiveEntry:
    """Read one archived run's header; never raises for a bad file.

    Parameters
    ----------
    path : str or Path
        A netCDF file.

    Returns
    -------
    ArchiveEntry
        With ``problem`` set when the file is unreadable or not a layers run.
    """
    import netCDF4

    path = Path(path)
    try:
        nc = netCDF4.Dataset(path, "r")
    except OSError as exc:
        reason = exc.strerror or str(exc)
        if isinstance(exc.errno, int) and exc.errno < 0:  # netCDF library codes are negative
            reason = f"not a readable netCDF file ({reason})"
        return ArchiveEntry(path, problem=f"unreadable: {reason}")
    except Exception as exc:  # noqa: BLE001 - a listing never crashes on one bad file
        return ArchiveEntry(path, problem=f"unreadable: {type(exc).__name__}: {exc}")
    try:
        return _entry_from(nc, path)
    except Exception as exc:  # noqa: BLE001 - a damaged variable or attribute: list it with the reason
        return ArchiveEntry(path, problem=f"damaged run: {type(exc).__name__}: {exc}")
    finally:
        nc.close()


def _entry_from(nc: Any, path: Path) -> ArchiveEntry:
    names = nc.ncattrs()
    product = _text(nc, names, "product")
    problem = not_a_run(names, nc.variables, product)
    if problem:
        known = product if product in OTHER_PRODUCTS else next(
            (name for name, (variable, _) in OTHER_PRODUCTS.items() if variable is not None and variable in nc.variables), None
        )
        return ArchiveEntry(path, title=_text(nc, names, "title"), problem=problem, product=known)
    summary = {n[len(SUMMARY_PREFIX):]: nc.getncattr(n) for n in names if n.startswith(SUMMARY_PREFIX)}
    source = "attributes"
    if "surface_temperature_outside_max_degC" not in summary or "heat_flow_inside_mean" not in summary:
        summary = {k[len(SUMMARY_PREFIX):]: v for k, v in _headline_from_variables(nc, names).items()}
        source = "variables"
    return ArchiveEntry(
        path=path,
        title=_text(nc, names, "title"),
        label=_text(nc, names, "label"),
        created=_text(nc, names, "created"),
        case_sha256=_text(nc, names, "case_sha256"),
        geometry=_text(nc, names, "geometry"),
        start=_str_or_none(summary.get("time_start")),
        end=_str_or_none(summary.get("time_end")),
        duration_s=_number(summary.get("duration_s")),
        surface_temperature_outside_max=_number(summary.get("surface_temperature_outside_max_degC")),
        surface_temperature_outside_min=_number(summary.get("surface_temperature_outside_min_degC")),
        surface_temperature_inside_max=_number(summary.get("surface_temperature_inside_max_degC")),
        surface_temperature_inside_min=_number(summary.get("surface_temperature_inside_min_degC")),
        heat_flow_inside_mean=_number(summary.get("heat_flow_inside_mean")),
        heat_flow_units=_str_or_none(summary.get("heat_flow_inside_mean_units")),
        headline_source=source,
        product=product if product == "sweep" else "run",
        points=int(nc.getncattr("sweep_points")) if product == "sweep" and "sweep_points" in names else None,
    )


def _headline_from_variables(nc: Any, names: Sequence[str]) -> dict[str, float | str]:
    """Headline values of a run written before the summary attributes: read the small series."""
    import netCDF4

    nc.set_auto_mask(False)
    time = nc.variables["time"]
    stamps = time[:]
    when = netCDF4.num2date(
        [stamps[0], stamps[-1]],
        time.units,
        getattr(time, "calendar", "standard"),
        only_use_cftime_datetimes=False,
        only_use_python_datetimes=True,
    )
    seconds = (stamps - stamps[0]) * _seconds_per(time.units)
    flow = nc.variables["heat_flow_inside"]
    inside = nc.variables.get("surface_temperature_inside")
    heat_in = nc.getncattr("heat_in_inside_total") if "heat_in_inside_total" in names else None
    return headline_values(
        seconds=seconds.astype(float),
        start=format_utc(when[0]),
        end=format_utc(when[-1]),
        outside=nc.variables["surface_temperature_outside"][:],
        inside=inside[:] if inside is not None else None,
        flow=None if heat_in is not None else flow[:],
        flow_units=str(getattr(flow, "units", "")),
        heat_in_total=heat_in,
    )


_TIME_UNIT_SECONDS = {
    "s": 1.0, "sec": 1.0, "secs": 1.0, "second": 1.0, "seconds": 1.0,
    "min": 60.0, "mins": 60.0, "minute": 60.0, "minutes": 60.0,
    "h": 3600.0, "hr": 3600.0, "hrs": 3600.0, "hour": 3600.0, "hours": 3600.0,
    "d": 86400.0, "day": 86400.0, "days": 86400.0,
}


def _seconds_per(units: str) -> float:
    """Seconds per unit of a CF time ``units`` string (``"seconds since ..."``)."""
    word = units.split(" since ")[0].strip().lower()
    if word not in _TIME_UNIT_SECONDS:
        raise ValueError(f"time units {units!r} are not seconds, minutes, hours or days since a date")
    return _TIME_UNIT_SECONDS[word]


def _text(nc: Any, names: Sequence[str], key: str) -> str | None:
    return str(nc.getncattr(key)) if key in names else None


def _str_or_none(value: Any) -> str | None:
    return None if value is None else str(value)


def _number(value: Any) -> float | None:
    if value is None:
        return None
    try:
        return float(np.asarray(value).ravel()[0])
    except (TypeError, ValueError, IndexError):
        return None


def _created_key(entry: ArchiveEntry) -> tuple:
    """Sort key: runs by creation time (oldest first), then files with a problem, by name."""
    when = None
    if entry.created:
        try:
            when = dt.datetime.fromisoformat(entry.created)
            if when.tzinfo is None:
                when = when.replace(tzinfo=dt.timezone.utc)
        except ValueError:
            when = None
    missing = when is None
    return (not entry.is_run, missing, when or dt.datetime.min.replace(tzinfo=dt.timezone.utc), entry.path.name)


def cache_dir() -> Path:
    """Where ``layers list`` keeps its header cache: ``$LAYERS_CACHE_DIR``, else
    ``$XDG_CACHE_HOME/layers``, else ``~/.cache/layers``.

    The cache lives outside the archive, so a read-only or shared archive
    folder is never written to.
    """
    explicit = os.environ.get(CACHE_ENV)
    if explicit:
        return Path(explicit)
    base = os.environ.get("XDG_CACHE_HOME") or Path.home() / ".cache"
    return Path(base) / "layers"


def _cache_file(folder: Path) -> Path:
    digest = hashlib.sha256(str(folder.resolve()).encode("utf-8")).hexdigest()[:16]
    return cache_dir() / f"list-{digest}.json"


def _stamp(st: os.stat_result) -> list[int]:
    """What identifies one version of a file: size, modification time [ns], inode."""
    return [st.st_size, st.st_mtime_ns, st.st_ino]


def _load_cache(path: Path) -> dict[str, Any]:
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return {}
    if not isinstance(data, dict) or data.get("format") != CACHE_FORMAT or data.get("fields") != _ENTRY_FIELDS:
        return {}
    files = data.get("files")
    return files if isinstance(files, dict) else {}


def _save_cache(path: Path, files: dict[str, Any]) -> None:
    """Write the cache atomically; an unwritable cache is only slower, never an error."""
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=".list-", suffix=".tmp", dir=path.parent)
    except OSError:
        return
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as handle:
            json.dump({"format": CACHE_FORMAT, "fields": _ENTRY_FIELDS, "files": files}, handle)
        os.replace(tmp, path)
    except OSError:
        with contextlib.suppress(OSError):
            os.unlink(tmp)


def list_runs(folder: str | os.PathLike, *, cache: bool = True) -> list[ArchiveEntry]:
    """Every ``*.nc`` file of a folder, runs sorted by creation time, headers only.

    Opening a netCDF-4 file costs about 3 ms however little is read from it
    (the netCDF library reads every variable's metadata on open), so a
    thousand runs take seconds.  Each file's entry is therefore kept in a
    cache (:func:`cache_dir`) under its size, modification time and inode;
    a file is read again only when one of those changes.

    Parameters
    ----------
    folder : str or Path
        The archive folder (not searched recursively; hidden files skipped).
    cache : bool
        Use and update the header cache (default).  False reads every file.

    Returns
    -------
    list of ArchiveEntry
        Runs oldest first, then the files that are not runs, each with its reason.

    Raises
    ------
    CaseError
        If ``folder`` does not exist or is not a folder.
    """
    folder = Path(folder)
    if not folder.is_dir():
        reason = "is not a folder" if folder.exists() else "no such folder (no run has been archived here yet)"
        raise CaseError(str(folder), "DIR", reason)
    with os.scandir(folder) as it:
        found = [
            (Path(e.path), _stamp(e.stat()))
            for e in it
            if e.name.lower().endswith(".nc") and not e.name.startswith(".") and e.is_file()
        ]
    cache_path = _cache_file(folder) if cache else None
    known = _load_cache(cache_path) if cache_path else {}
    files: dict[str, Any] = {}
    entries = []
    for path, stamp in found:
        held = known.get(path.name)
        entry = None
        if isinstance(held, dict) and held.get("stamp") == stamp:
            entry = _entry_from_cache(path, held.get("entry"))
        if entry is None:
            entry = read_entry(path)
        entries.append(entry)
        files[path.name] = {"stamp": stamp, "entry": _entry_to_cache(entry)}
    if cache_path and files != known:
        _save_cache(cache_path, files)
    return sorted(entries, key=_created_key)


def _entry_to_cache(entry: ArchiveEntry) -> dict[str, Any]:
    return {f: getattr(entry, f) for f in _ENTRY_FIELDS}


def _entry_from_cache(path: Path, held: Any) -> ArchiveEntry | None:
    if not isinstance(held, dict) or set(held) != set(_ENTRY_FIELDS):
        return None
    return ArchiveEntry(path=path, **held)


def _duration(seconds: float | None) -> str:
    """The duration column: empty when unknown, else the short form (``7 d``, ``1.51 h``)."""
    if seconds is None or not math.isfinite(seconds):
        return ""
    return format_duration(seconds, approximate=True)


def _fmt(value: float | None, spec: str = ".2f") -> str:
    return "" if value is None or not math.isfinite(value) else format(value, spec)


def format_list(entries: Sequence[ArchiveEntry]) -> str:
    """The ``layers list`` table: one row per file."""
    header = (
        "created (UTC)", "file", "title", "label", "case", "geometry", "duration",
        "Ts,out max", "Ts,out min", "q,in mean",
    )
    units = ("", "", "", "", "sha256", "", "", "[degC]", "[degC]", "")
    rows = []
    for e in entries:
        if not e.is_run:
            rows.append(("", e.path.name, f"({e.problem})"))
            continue
        q = _fmt(e.heat_flow_inside_mean, ".3g")
        if q:
            q += f" {display_units(e.heat_flow_units or '')}".rstrip()
        rows.append((
            (e.created or "").replace("T", " ").rstrip("Z")[:16],
            e.path.name,
            (f"[sweep, {e.points} points] " if e.product == "sweep" else "") + _clip(e.title or "", 36),
            _clip(e.label or "", 16),
            (e.case_sha256 or "")[:8],
            e.geometry or "",
            _duration(e.duration_s),
            _fmt(e.surface_temperature_outside_max),
            _fmt(e.surface_temperature_outside_min),
            q,
        ))
    full = [r for r in rows if len(r) == len(header)]
    widths = [max([len(header[i]), len(units[i])] + [len(r[i]) for r in full]) for i in range(len(header))]
    right = {7, 8, 9}

    def line(cells: Sequence[str]) -> str:
        return "  ".join(c.rjust(widths[i]) if i in right else c.ljust(widths[i]) for i, c in enumerate(cells)).rstrip()

    out = [line(header), line(units)]
    for r in rows:
        out.append(line(r) if len(r) == len(header) else "  ".join([r[0].ljust(widths[0]), r[1].ljust(widths[1]), r[2]]))
    return "\n".join(out)


def _clip(text: str, width: int) -> str:
    return text if len(text) <= width else text[: width - 1] + "~"


def list_footer(entries: Sequence[ArchiveEntry], folder: str | os.PathLike) -> str:
    """The last line of ``layers list``: how many runs and other files."""
    sweeps = sum(e.is_run and e.product == "sweep" for e in entries)
    runs = sum(e.is_run for e in entries) - sweeps
    others = len(entries) - runs - sweeps
    return (f"{runs} run{'s' * (runs != 1)}" + (f" and {sweeps} sweep{'s' * (sweeps != 1)}" if sweeps else "") + f" in {folder}"
            + (f"; {others} other file{'s' * (others != 1)}" if others else ""))

