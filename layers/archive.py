"""The run archive: list the runs in a folder, compare runs side by side.

``layers list`` reads netCDF *headers* only (through :mod:`netCDF4`, without
xarray), so a folder of a thousand runs answers in well under two seconds.
The headline results it shows are global attributes written with each run
(:func:`headline_attributes`); for runs written before those attributes
existed it falls back to reading the two small time series it needs.

``layers compare`` aligns runs in time (the common overlap, on the time
stamps of the coarsest run, others interpolated linearly) and in depth
(surfaces and layer interfaces; profiles interpolated onto the union of the
cell centres), tabulates headline metrics with differences, and writes an
overlay plot or one Dataset along a new ``run`` dimension labelled by what
differs between the runs' case files.

Library functions return dataclasses and xarray objects; only
:func:`cmd_list` and :func:`cmd_compare` print.
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
import tomllib
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from layers import CAUTION
from layers.errors import CaseError

if TYPE_CHECKING:  # xarray is imported lazily: `layers list` does not need it
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
CACHE_FORMAT = 2

#: Output suffixes of ``layers compare -o``.
IMAGE_SUFFIXES = (".png", ".svg", ".pdf")


_DISPLAY_UNITS = {"W m-2": "W/m2", "W m-1": "W/m", "W": "W", "degC": "degC", "K": "K"}


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
    return _headline(
        seconds=seconds.astype(float),
        start=_iso_utc(ds["time"].values[0]),
        end=_iso_utc(ds["time"].values[-1]),
        outside=ds["surface_temperature_outside"].values,
        inside=ds["surface_temperature_inside"].values if "surface_temperature_inside" in ds else None,
        flow=flow.values,
        flow_units=str(flow.attrs.get("units", "")),
        heat_in_total=ds.attrs.get("heat_in_inside_total"),
    )


def _headline(
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


def _iso_utc(value: Any) -> str:
    """A datetime64 or datetime as ``YYYY-MM-DDTHH:MM:SSZ``."""
    if isinstance(value, dt.datetime):
        return value.strftime("%Y-%m-%dT%H:%M:%SZ")
    return f"{np.datetime_as_string(np.datetime64(value, 's'), unit='s')}Z"


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
        What the file is: ``run``, ``sizing``, ``periodic`` or
        ``comparison``; None for a foreign or unreadable file.
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
}


def _not_a_run(attrs: Sequence[str], variables: Sequence[str], product: str | None = None) -> str | None:
    """Why a readable netCDF file is not a layers run, or None if it is one."""
    for name, (variable, reason) in OTHER_PRODUCTS.items():
        if product == name or (product is None and variable is not None and variable in variables):
            return reason
    missing_attrs = [a for a in RUN_ATTRIBUTES if a not in attrs]
    if missing_attrs:
        return "not a layers run (no " + ", ".join(repr(a) for a in missing_attrs) + " attribute)"
    missing_vars = [v for v in RUN_VARIABLES if v not in variables]
    if missing_vars:
        return "not a layers run: no " + ", ".join(repr(v) for v in missing_vars) + " variable (a sizing or periodic result?)"
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
    problem = _not_a_run(names, nc.variables, product)
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
        product="run",
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
    return _headline(
        seconds=seconds.astype(float),
        start=_iso_utc(when[0]),
        end=_iso_utc(when[-1]),
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


def _short_duration(seconds: float | None) -> str:
    """A duration as the largest whole unit that fits: ``7 d``, ``36 h``, ``90 min``."""
    if seconds is None or not math.isfinite(seconds):
        return ""
    for unit, size in (("d", 86400.0), ("h", 3600.0), ("min", 60.0)):
        if seconds >= size and abs(seconds / size - round(seconds / size)) < 1e-9:
            return f"{seconds / size:g} {unit}"
    return f"{seconds / 3600.0:.3g} h" if seconds >= 3600 else f"{seconds:g} s"


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
            q += f" {_DISPLAY_UNITS.get(e.heat_flow_units or '', e.heat_flow_units or '')}".rstrip()
        rows.append((
            (e.created or "").replace("T", " ").rstrip("Z")[:16],
            e.path.name,
            _clip(e.title or "", 36),
            _clip(e.label or "", 16),
            (e.case_sha256 or "")[:8],
            e.geometry or "",
            _short_duration(e.duration_s),
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
    runs = sum(e.is_run for e in entries)
    others = len(entries) - runs
    return f"{runs} run{'s' * (runs != 1)} in {folder}" + (f"; {others} other file{'s' * (others != 1)}" if others else "")


# --------------------------------------------------------------------------- #
# compare: loading and case differences


def load_run(path: str | os.PathLike) -> xr.Dataset:
    """Open an archived run fully into memory.

    Raises
    ------
    CaseError
        If the file cannot be read or is not a layers run.
    """
    import xarray as xr

    path = Path(path)
    if not path.is_file():
        raise CaseError(str(path), "(file)", "no such file")
    try:
        with xr.open_dataset(path, engine="netcdf4") as ds:
            ds = ds.load()
    except Exception as exc:  # noqa: BLE001 - any reader failure is bad input, not an internal error
        raise CaseError(str(path), "(file)", f"cannot read as netCDF ({type(exc).__name__}: {exc})") from None
    problem = _not_a_run(list(ds.attrs), list(ds.variables), ds.attrs.get("product"))
    if problem:
        raise CaseError(str(path), "(file)", problem)
    if "temperature" not in ds or "x" not in ds.dims:
        raise CaseError(str(path), "(file)", "not a layers run: no 'temperature' profile")
    return ds


def flatten_case(data: dict[str, Any], prefix: str = "") -> dict[str, Any]:
    """Flatten parsed TOML into dotted keys: ``layers[2].thickness``, ``time.step``.

    Arrays of tables are numbered from 1, as case-file errors name them.
    """
    out: dict[str, Any] = {}
    for key, value in data.items():
        name = f"{prefix}.{key}" if prefix else str(key)
        if isinstance(value, dict):
            out.update(flatten_case(value, name))
        elif isinstance(value, list) and value and all(isinstance(v, dict) for v in value):
            for i, item in enumerate(value, start=1):
                out.update(flatten_case(item, f"{name}[{i}]"))
        else:
            out[name] = value
    return out


_ABSENT = object()


def case_differences(case_texts: Sequence[str]) -> tuple[list[str], list[dict[str, Any]]]:
    """Keys whose values differ between case texts, and each case's flattened values.

    Parameters
    ----------
    case_texts : sequence of str
        TOML case texts (a text that does not parse counts as empty).

    Returns
    -------
    keys : list of str
        Differing dotted keys, in the order they first appear.
    flat : list of dict
        Each case flattened (see :func:`flatten_case`).
    """
    flat = []
    for text in case_texts:
        try:
            flat.append(flatten_case(tomllib.loads(text or "")))
        except tomllib.TOMLDecodeError:
            flat.append({})
    order: dict[str, None] = {}
    for f in flat:
        order.update(dict.fromkeys(f))
    keys = [k for k in order if len({repr(f.get(k, _ABSENT)) for f in flat}) > 1]
    return keys, flat


def _value_text(value: Any) -> str:
    if value is _ABSENT:
        return "(absent)"
    if isinstance(value, str):
        return value
    if isinstance(value, bool):
        return str(value).lower()
    return json.dumps(value, default=str) if isinstance(value, (list, dict)) else str(value)


def run_labels(datasets: Sequence[xr.Dataset], files: Sequence[Path]) -> tuple[list[str], list[str]]:
    """Unique labels naming what differs between the runs' archived cases.

    ``title`` and ``label`` count only when nothing else differs; runs of the
    same case are labelled by file stem.

    Returns
    -------
    labels : list of str
        ``"layers[2].thickness=30 mm"``, one per run.
    keys : list of str
        The differing case keys used.
    """
    keys, flat = case_differences([str(ds.attrs.get("case", "")) for ds in datasets])
    used = [k for k in keys if k not in ("title", "label")] or keys
    labels = []
    for f, path in zip(flat, files):
        text = ", ".join(f"{k}={_value_text(f.get(k, _ABSENT))}" for k in used)
        labels.append(text or Path(path).stem)
    seen: dict[str, int] = {}
    unique = []
    for text in labels:
        seen[text] = seen.get(text, 0) + 1
        unique.append(text if seen[text] == 1 else f"{text} ({seen[text]})")
    return unique, used


# --------------------------------------------------------------------------- #
# compare: alignment


def _check_comparable(datasets: Sequence[xr.Dataset], files: Sequence[Path]) -> None:
    geometry = str(datasets[0].attrs["geometry"])
    for ds, path in zip(datasets[1:], files[1:]):
        if str(ds.attrs["geometry"]) != geometry:
            raise CaseError(
                str(path),
                "geometry",
                f"is {ds.attrs['geometry']}, but {files[0].name} is {geometry}: runs of different geometry "
                "have heat flows per different reference units and cannot be compared",
            )


def common_window(datasets: Sequence[xr.Dataset], files: Sequence[Path]) -> tuple[np.datetime64, np.datetime64]:
    """The overlap in time of all runs [start, end].

    Raises
    ------
    CaseError
        If the runs have no common time span.
    """
    starts = [ds["time"].values[0] for ds in datasets]
    ends = [ds["time"].values[-1] for ds in datasets]
    late, early = int(np.argmax(starts)), int(np.argmin(ends))
    if ends[early] <= starts[late]:
        raise CaseError(
            str(files[late]),
            "time",
            f"no overlap in time: it runs from {_iso_utc(starts[late])} to {_iso_utc(ends[late])}, but "
            f"{files[early].name} ends at {_iso_utc(ends[early])}",
        )
    return starts[late], ends[early]


def common_times(datasets: Sequence[xr.Dataset], start: np.datetime64, end: np.datetime64) -> tuple[np.ndarray, int | None]:
    """Time stamps to compare on, and the run they come from (None: all runs share them).

    Identical stamps are kept.  Otherwise the stamps of the coarsest run in
    the overlap are used (every run is then compared at the same instants and
    no run is interpolated onto stamps finer than the coarsest one samples);
    with fewer than two of those, the union of all stamps in the overlap.
    """
    first = datasets[0]["time"].values
    if all(len(ds["time"]) == len(first) and np.array_equal(ds["time"].values, first) for ds in datasets):
        return first, None
    inside = [ds["time"].values[(ds["time"].values >= start) & (ds["time"].values <= end)] for ds in datasets]
    coarsest = int(np.argmin([len(t) for t in inside]))
    if len(inside[coarsest]) >= 2:
        return inside[coarsest], coarsest
    union = np.unique(np.concatenate(inside + [np.array([start, end], dtype=first.dtype)]))
    return union, None


def _interp_time(values: np.ndarray, t: np.ndarray, grid: np.ndarray) -> np.ndarray:
    """Linear interpolation along the first axis; exact at coinciding stamps."""
    ts = (t - grid[0]) / np.timedelta64(1, "s")
    gs = (grid - grid[0]) / np.timedelta64(1, "s")
    i = np.clip(np.searchsorted(ts, gs, side="right") - 1, 0, len(ts) - 1)
    j = np.minimum(i + 1, len(ts) - 1)
    span = ts[j] - ts[i]
    w = np.where(span > 0, (gs - ts[i]) / np.where(span > 0, span, 1.0), 0.0)
    w = w.reshape((-1,) + (1,) * (values.ndim - 1))
    return values[i] * (1.0 - w) + values[j] * w


def interface_temperatures(ds: xr.Dataset) -> xr.DataArray:
    """Temperatures at the internal layer faces, from the cell-centre profile [degC].

    Each side's two cells nearest the face are extrapolated linearly to it
    (second order in the cell size for a smooth profile within a layer, the
    order of the finite-volume scheme); the value is the mean of the two
    sides, or the one side with cells next to an air gap.  At a contact
    resistance the two sides differ and the mean lies between them.

    Returns
    -------
    xarray.DataArray
        Dims ``(time, interface)``; ``interface`` = 1 is the face between
        layers 1 and 2.
    """
    import xarray as xr

    faces = np.asarray(ds["layer_interface"].values, dtype=float)
    x = np.asarray(ds["x"].values, dtype=float)
    layer = np.asarray(ds["layer"].values)
    temp = np.asarray(ds["temperature"].transpose("time", "x").values, dtype=float)
    n_faces = max(len(faces) - 2, 0)
    out = np.full((temp.shape[0], n_faces), np.nan)
    for j in range(1, len(faces) - 1):
        xf = faces[j]
        sides = []
        for number, pick in ((j, slice(-2, None)), (j + 1, slice(0, 2))):
            cells = np.flatnonzero(layer == number)[pick]
            if len(cells) == 0:
                continue
            if len(cells) == 1:
                sides.append(temp[:, cells[0]])
                continue
            a, b = cells if number == j else cells[::-1]  # b is the cell next to the face
            slope = (temp[:, b] - temp[:, a]) / (x[b] - x[a])
            sides.append(temp[:, b] + slope * (xf - x[b]))
        if sides:
            out[:, j - 1] = np.mean(sides, axis=0)
    return xr.DataArray(
        out,
        dims=("time", "interface"),
        coords={"time": ds["time"].values, "interface": np.arange(1, n_faces + 1, dtype=np.int32)},
        attrs={
            "units": "degC",
            "long_name": "temperature at the layer interface",
            "comment": "extrapolated from the two nearest cell centres on each side; mean of the sides",
            "cell_methods": "time: point",
        },
    )


def _profile(ds: xr.Dataset, grid_x: np.ndarray, temp: np.ndarray, t_in: np.ndarray, t_out: np.ndarray) -> np.ndarray:
    """A run's profile (cell centres plus both surfaces) interpolated linearly onto ``grid_x``; NaN beyond its thickness."""
    faces = np.asarray(ds["layer_interface"].values, dtype=float)
    nodes = np.concatenate([[faces[0]], np.asarray(ds["x"].values, dtype=float), [faces[-1]]])
    values = np.concatenate([t_in[:, None], temp, t_out[:, None]], axis=1)
    out = np.empty((temp.shape[0], len(grid_x)))
    for k in range(temp.shape[0]):
        out[k] = np.interp(grid_x, nodes, values[k], left=np.nan, right=np.nan)
    return out


# --------------------------------------------------------------------------- #
# compare: metrics


@dataclass(frozen=True)
class Metric:
    """One headline metric of every run over the common window.

    Attributes
    ----------
    name : str
    units : str
    values : tuple of float
        One per run, in the order the runs were given.
    """

    name: str
    units: str
    values: tuple[float, ...]

    @property
    def differences(self) -> tuple[float, ...]:
        """Each run minus the first run [``units``; K for temperatures]."""
        return tuple(v - self.values[0] for v in self.values)


@dataclass(frozen=True)
class Comparison:
    """Runs aligned in time and depth, with their headline metrics.

    Attributes
    ----------
    files : tuple of Path
    labels : tuple of str
        What differs between the runs' cases (the ``run`` coordinate).
    differing_keys : tuple of str
        Case keys whose values differ.
    start, end : numpy.datetime64
        The common window.
    time_source : int or None
        Index of the run whose time stamps are used (None: all runs share
        their stamps, or their union is used).
    same_mesh : bool
        All runs have the same cell centres.
    interfaces_compared : int
        Internal layer faces compared (0 when the layer counts differ).
    exact_heat_flow_means : bool
        Mean heat flows come from the runs' step-by-step totals (every run
        spans the window), not from the kept samples.
    metrics : tuple of Metric
        Over the common window.
    largest_differences : tuple of Metric
        The largest absolute difference from the first run at any compared
        time, per series (0 for the first run).
    dataset : xarray.Dataset
        The runs along a new ``run`` dimension (time-aligned series,
        depth-aligned ``temperature``, ``temperature_interface``).
    """

    files: tuple[Path, ...]
    labels: tuple[str, ...]
    differing_keys: tuple[str, ...]
    start: np.datetime64
    end: np.datetime64
    time_source: int | None
    same_mesh: bool
    interfaces_compared: int
    exact_heat_flow_means: bool
    metrics: tuple[Metric, ...]
    largest_differences: tuple[Metric, ...]
    dataset: xr.Dataset = field(repr=False)


def _mean_over(values: np.ndarray, seconds: np.ndarray) -> float:
    if seconds[-1] > seconds[0]:
        return float(np.trapezoid(values, seconds) / (seconds[-1] - seconds[0]))
    return float(values[0])


def _peak(values: np.ndarray) -> float:
    return float(values[int(np.nanargmax(np.abs(values)))])


def _metrics(
    combined: xr.Dataset,
    exact_means: dict[str, list[float]] | None = None,
    run_attrs: Sequence[dict] = (),
) -> tuple[tuple[Metric, ...], tuple[Metric, ...]]:
    """Headline metrics over the common window, and the largest differences from the first run.

    ``exact_means`` (per heat-flow variable, one value per run) replaces the
    trapezoidal mean of the kept samples when every run spans the window.
    ``run_attrs`` (each run's global attributes) add the freeze times of
    runs with contents (over each whole run, NaN where not reached).
    """
    seconds = (combined["time"].values - combined["time"].values[0]) / np.timedelta64(1, "s")
    metrics: list[Metric] = []
    largest: list[Metric] = []

    def add(name: str, units: str, fn, data: np.ndarray) -> None:
        metrics.append(Metric(name, units, tuple(float(fn(row)) for row in data)))

    for side in ("outside", "inside"):
        var = f"surface_temperature_{side}"
        data = combined[var].values
        add(f"{side} surface temperature, max", "degC", np.nanmax, data)
        add(f"{side} surface temperature, min", "degC", np.nanmin, data)
        add(f"{side} surface temperature, mean", "degC", lambda r: _mean_over(r, seconds), data)
    for side in ("inside", "outside"):
        var = f"heat_flow_{side}"
        units = str(combined[var].attrs.get("units", ""))
        data = combined[var].values
        if exact_means and var in exact_means:
            metrics.append(Metric(f"heat flow, {side} surface, mean", units, tuple(exact_means[var])))
        else:
            add(f"heat flow, {side} surface, mean", units, lambda r: _mean_over(r, seconds), data)
        add(f"heat flow, {side} surface, peak", units, _peak, data)
    if "temperature_interface" in combined and combined.sizes.get("interface", 0):
        materials = combined.attrs.get("comparison_interface_names", "").split("; ")
        for k in range(combined.sizes["interface"]):
            data = combined["temperature_interface"].values[:, k, :]
            where = materials[k] if k < len(materials) and materials[k] else f"interface {k + 1}"
            add(f"interface {k + 1} ({where}), max", "degC", np.nanmax, data)
            add(f"interface {k + 1} ({where}), min", "degC", np.nanmin, data)
    if "contents_temperature" in combined:
        add("contents temperature, min", "degC", np.nanmin, combined["contents_temperature"].values)
    if "ice_fraction" in combined:
        add("ice fraction, max", "1", np.nanmax, combined["ice_fraction"].values)
    for key, name in (("time_to_freezing_h", "contents reach 0 degC after"), ("freeze_time_h", "freeze time (max_ice_fraction)")):
        if run_attrs and any(key in a for a in run_attrs):
            metrics.append(Metric(name, "h", tuple(float(a.get(key, math.nan)) for a in run_attrs)))
    for var, name in (
        ("surface_temperature_outside", "outside surface temperature"),
        ("surface_temperature_inside", "inside surface temperature"),
        ("heat_flow_inside", "heat flow, inside surface"),
    ):
        data = combined[var].values
        units = "K" if "temperature" in var else str(combined[var].attrs.get("units", ""))
        largest.append(Metric(name, units, tuple(float(np.nanmax(np.abs(row - data[0]))) for row in data)))
    if "temperature_interface" in combined and combined.sizes.get("interface", 0):
        data = combined["temperature_interface"].values
        for k in range(combined.sizes["interface"]):
            largest.append(
                Metric(f"interface {k + 1} temperature", "K", tuple(float(np.nanmax(np.abs(row[k] - data[0][k]))) for row in data))
            )
    return tuple(metrics), tuple(largest)


def _exact_means(datasets: Sequence[xr.Dataset], start: np.datetime64, end: np.datetime64) -> dict[str, list[float]] | None:
    """Mean heat flows from the runs' step-by-step totals, when every run spans exactly the window.

    The totals (``heat_in_inside_total``, ``heat_out_outside_total``) are
    summed from the scheme's own fluxes at every step, so they are exact for
    the discrete model; ``layers list`` shows the same value.  If any run
    spans more than the window, every run uses the trapezoidal mean of its
    samples instead, so that all columns are computed the same way.
    """
    full = all(ds["time"].values[0] == start and ds["time"].values[-1] == end for ds in datasets)
    names = {"heat_flow_inside": "heat_in_inside_total", "heat_flow_outside": "heat_out_outside_total"}
    if not full or not all(total in ds.attrs for ds in datasets for total in names.values()):
        return None
    duration = (end - start) / np.timedelta64(1, "s")
    return {var: [float(ds.attrs[total]) / duration for ds in datasets] for var, total in names.items()}


def compare_runs(paths: Sequence[str | os.PathLike]) -> Comparison:
    """Load, check and align runs; compute their headline metrics.

    Parameters
    ----------
    paths : sequence of str or Path
        Two or more archived runs; the first is the reference for differences.

    Returns
    -------
    Comparison

    Raises
    ------
    CaseError
        Fewer than two runs, an unreadable or foreign file, runs of different
        geometry, or runs with no overlap in time.
    """
    files = tuple(Path(p) for p in paths)
    if len(files) < 2:
        raise CaseError("(command line)", "RUNS", "give at least two runs to compare")
    datasets = [load_run(p) for p in files]
    _check_comparable(datasets, files)
    start, end = common_window(datasets, files)
    grid, source = common_times(datasets, start, end)
    labels, keys = run_labels(datasets, files)
    combined, same_mesh, n_interfaces = _combine(datasets, files, labels, keys, grid, source)
    exact = _exact_means(datasets, start, end)
    metrics, largest = _metrics(combined, exact, [dict(ds.attrs) for ds in datasets])
    return Comparison(
        files=files,
        labels=tuple(labels),
        differing_keys=tuple(keys),
        start=grid[0],
        end=grid[-1],
        time_source=source,
        same_mesh=same_mesh,
        interfaces_compared=n_interfaces,
        exact_heat_flow_means=exact is not None,
        metrics=metrics,
        largest_differences=largest,
        dataset=combined,
    )


def _combine(
    datasets: Sequence[xr.Dataset],
    files: Sequence[Path],
    labels: Sequence[str],
    keys: Sequence[str],
    grid: np.ndarray,
    source: int | None,
) -> tuple[xr.Dataset, bool, int]:
    """The runs on the common time stamps and depth grid, along a new ``run`` dimension."""
    import xarray as xr

    from layers import __version__
    from layers.results import cf_encoding

    n = len(datasets)
    first = datasets[0]
    # series on time only, present in any run (NaN where a run lacks one)
    series: dict[str, dict[str, Any]] = {}
    for ds in datasets:
        for name, var in ds.data_vars.items():
            if var.dims == ("time",) and name not in series:
                series[name] = dict(var.attrs)
    data_vars: dict[str, tuple] = {}
    interpolated = source is not None or not all(np.array_equal(ds["time"].values, grid) for ds in datasets)
    for name, attrs in series.items():
        stack = np.full((n, len(grid)), np.nan)
        for i, ds in enumerate(datasets):
            if name in ds:
                stack[i] = _interp_time(np.asarray(ds[name].values, dtype=float), ds["time"].values, grid)
        if interpolated:
            attrs = {**attrs, "comment": "interpolated linearly in time onto the common time stamps"}
        data_vars[name] = (("run", "time"), stack, attrs)

    # depth: identical meshes keep their cells; otherwise the union of the cell centres
    same_mesh = all(
        len(ds["x"]) == len(first["x"]) and np.allclose(ds["x"].values, first["x"].values, rtol=0, atol=1e-12)
        for ds in datasets
    )
    if same_mesh:
        grid_x = np.asarray(first["x"].values, dtype=float)
    else:
        grid_x = np.unique(np.round(np.concatenate([ds["x"].values for ds in datasets]), 12))
    profiles = np.empty((n, len(grid), len(grid_x)))
    for i, ds in enumerate(datasets):
        temp = _interp_time(np.asarray(ds["temperature"].transpose("time", "x").values, dtype=float), ds["time"].values, grid)
        if same_mesh:
            profiles[i] = temp
        else:
            t_in = data_vars["surface_temperature_inside"][1][i]
            t_out = data_vars["surface_temperature_outside"][1][i]
            profiles[i] = _profile(ds, grid_x, temp, t_in, t_out)
    t_attrs = dict(first["temperature"].attrs)
    if not same_mesh:
        t_attrs["comment"] = (
            "each run's cell-centre and surface temperatures interpolated linearly onto the union of the "
            "runs' cell centres; NaN beyond a run's thickness"
        )
    data_vars["temperature"] = (("run", "time", "x"), profiles, t_attrs)

    # interfaces: compared by number when the runs have the same number of layers
    layer_counts = {len(ds["layer_interface"]) for ds in datasets}
    n_interfaces = 0
    interface_names = ""
    if len(layer_counts) == 1:
        n_interfaces = layer_counts.pop() - 2
    if n_interfaces > 0:
        stack = np.empty((n, len(grid), n_interfaces))
        for i, ds in enumerate(datasets):
            face = interface_temperatures(ds)
            stack[i] = _interp_time(face.values, ds["time"].values, grid)
        attrs = dict(face.attrs)
        # CF 2.4: dimensions other than T, Z, Y, X go left of time
        data_vars["temperature_interface"] = (("run", "interface", "time"), stack.transpose(0, 2, 1), attrs)
        # named by its materials when every run has the same ones there,
        # else by each run's pair in run order ("brick | eps / brick | mineral-wool")
        names = []
        for k in range(1, n_interfaces + 1):
            pairs = list(dict.fromkeys(_interface_name(ds, k) for ds in datasets))
            names.append(" / ".join(pairs))
        interface_names = "; ".join(names)
    faces = max(len(ds["layer_interface"]) for ds in datasets)
    positions = np.full((n, faces), np.nan)
    for i, ds in enumerate(datasets):
        positions[i, : len(ds["layer_interface"])] = ds["layer_interface"].values
    data_vars["layer_interface"] = (("run", "face"), positions, dict(first["layer_interface"].attrs))

    coords: dict[str, Any] = {
        "run": ("run", np.array(labels, dtype=object), {"long_name": "run, labelled by the case keys that differ"}),
        "file": ("run", np.array([f.name for f in files], dtype=object), {"long_name": "archived run file"}),
        "title": ("run", np.array([str(ds.attrs.get("title", "")) for ds in datasets], dtype=object), {"long_name": "case title"}),
        "label": ("run", np.array([str(ds.attrs.get("label", "")) for ds in datasets], dtype=object), {"long_name": "run label"}),
        "case_sha256": ("run", np.array([str(ds.attrs.get("case_sha256", "")) for ds in datasets], dtype=object), {"long_name": "SHA-256 of the case text"}),
        "cells": ("run", np.array([ds.sizes["x"] for ds in datasets], dtype=np.int32), {"long_name": "number of cells", "units": "1"}),
        "time": ("time", grid, dict(first["time"].attrs)),
        "x": ("x", grid_x, dict(first["x"].attrs) if same_mesh else {
            "units": "m", "long_name": "distance from the inside surface (union of the runs' cell centres)", "axis": "X"}),
    }
    if same_mesh:
        for name in ("layer", "material", "radius"):
            if name in first.coords:
                coords[name] = ("x", first[name].values, dict(first[name].attrs))
    if n_interfaces > 0:
        coords["interface"] = ("interface", np.arange(1, n_interfaces + 1, dtype=np.int32), {"long_name": "internal layer face, from the inside (1: between layers 1 and 2)", "units": "1"})
    combined = xr.Dataset(data_vars=data_vars, coords=coords)
    stamp = dt.datetime.now(dt.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
    combined.attrs = {
        "Conventions": "CF-1.10",
        "title": f"Comparison of {n} layers runs",
        "product": "comparison",
        "source": f"layers {__version__} compare",
        "history": f"{stamp} layers compare " + " ".join(f.name for f in files),
        "software_version": __version__,
        "created": stamp,
        "geometry": str(first.attrs["geometry"]),
        "comparison_files": ", ".join(f.name for f in files),
        "comparison_differing_keys": ", ".join(keys) if keys else "(none)",
        "comparison_time_stamps": "identical in all runs" if source is None and not interpolated else (
            f"those of {files[source].name}; the others interpolated linearly" if source is not None else
            "union of all runs' stamps in the overlap; interpolated linearly"
        ),
        "comparison_depth": "identical meshes" if same_mesh else "meshes differ: profiles interpolated linearly onto the union of the cell centres",
        "comparison_interface_names": interface_names,
        "caution": CAUTION,
    }
    combined.attrs = {k: v for k, v in combined.attrs.items() if v != ""}
    cf_encoding(combined)
    combined["time"].encoding.update({
        "units": f"seconds since {np.datetime_as_string(grid[0], unit='s')}",
        "calendar": "proleptic_gregorian",
        "dtype": "float64",
    })
    return combined, same_mesh, max(n_interfaces, 0)


def _interface_name(ds: xr.Dataset, k: int) -> str:
    """``brick | mineral-wool`` for internal face k (between layers k and k+1)."""
    names = []
    for number in (k, k + 1):
        sel = np.flatnonzero(np.asarray(ds["layer"].values) == number)
        names.append(str(ds["material"].values[sel[0]]) if len(sel) and "material" in ds.coords else "air gap")
    return " | ".join(names)


# --------------------------------------------------------------------------- #
# compare: output


def _letters(n: int) -> list[str]:
    return [chr(ord("A") + i) for i in range(n)] if n <= 26 else [str(i + 1) for i in range(n)]


def format_comparison(comparison: Comparison) -> str:
    """The ``layers compare`` table: metrics side by side, differences from the first run."""
    c = comparison
    tags = _letters(len(c.files))
    hours = (c.end - c.start) / np.timedelta64(1, "h")
    lines = [f"comparing {len(c.files)} runs over {_iso_utc(c.start)} to {_iso_utc(c.end)} ({hours:g} h)"]
    for tag, path, label in zip(tags, c.files, c.labels):
        lines.append(f"  {tag}  {path.name}   {label}")
    lines.append(f"time:  {c.dataset.attrs['comparison_time_stamps']}")
    if c.same_mesh:
        lines.append("depth: identical meshes")
    else:
        cells = " and ".join(str(int(v)) for v in c.dataset["cells"].values)
        lines.append(
            f"depth: meshes differ ({cells} cells); compared at the surfaces"
            + (f" and at {c.interfaces_compared} interface{'s' * (c.interfaces_compared != 1)}" if c.interfaces_compared else "")
            + "; profiles interpolated"
        )
    if not c.interfaces_compared and len({np.isfinite(r).sum() for r in c.dataset["layer_interface"].values}) > 1:
        lines.append("       (the runs have different numbers of layers: interfaces not compared)")
    lines.append("")
    name_w = max(len(m.name) for m in (*c.metrics, *c.largest_differences))
    units_w = max(6, *(len(_DISPLAY_UNITS.get(m.units, m.units)) for m in (*c.metrics, *c.largest_differences)))
    head = f"{'metric over the common window':<{name_w}}  {'units':<{units_w}}"
    for i, tag in enumerate(tags):
        head += f"  {tag:>10}" + (f"  {tag + '-' + tags[0]:>10}" if i else "")
    lines.append(head)
    for m in c.metrics:
        row = f"{m.name:<{name_w}}  {_DISPLAY_UNITS.get(m.units, m.units):<{units_w}}"
        for i, (v, d) in enumerate(zip(m.values, m.differences)):
            row += f"  {_num(v):>10}" + (f"  {_num(d, signed=True):>10}" if i else "")
        lines.append(row)
    lines.append("")
    lines.append(f"largest difference from {tags[0]} at any compared time")
    for m in c.largest_differences:
        row = f"{m.name:<{name_w}}  {_DISPLAY_UNITS.get(m.units, m.units):<{units_w}}"
        for i, v in enumerate(m.values):
            row += f"  {'':>10}" + (f"  {_num(v):>10}" if i else "")
        lines.append(row)
    lines.append(
        "(temperature differences in K; heat-flow means "
        + ("from each run's step-by-step totals)" if c.exact_heat_flow_means else "from the compared samples, trapezoidal)")
    )
    return "\n".join(lines)


def _num(value: float, signed: bool = False) -> str:
    if not math.isfinite(value):
        return "-"
    if value == 0:
        return "0"
    text = f"{value:+.4g}" if signed else f"{value:.4g}"
    return text


def check_comparison_output(out: str | os.PathLike) -> None:
    """Refuse a ``compare -o`` target before any work: unknown kind or existing file."""
    suffix = Path(out).suffix.lower()
    if suffix not in (*IMAGE_SUFFIXES, ".nc"):
        raise CaseError(str(out), "-o", "use a .png, .svg or .pdf file for a plot, or .nc for the combined Dataset")
    from layers.results import refuse_existing

    refuse_existing(out)


def write_comparison(comparison: Comparison, out: str | os.PathLike) -> Path:
    """Write the combined Dataset (.nc) or the overlay figure (.png, .svg, .pdf), never over a file."""
    check_comparison_output(out)
    if Path(out).suffix.lower() == ".nc":
        from layers.results import write_output

        return write_output(comparison.dataset, out)
    from layers.plots import plot_comparison, save_figure

    labels = [f"{t}: {lab}" for t, lab in zip(_letters(len(comparison.files)), comparison.labels)]
    fig = plot_comparison(comparison.dataset, labels)
    try:
        return save_figure(fig, out, {"title": str(comparison.dataset.attrs.get("title", "")), "caution": CAUTION})
    except FileExistsError:
        from layers.results import exists_error

        raise exists_error(out) from None
