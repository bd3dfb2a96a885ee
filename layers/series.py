"""Time series that drive boundary conditions: CSV and netCDF files, generated cycles.

A weather or process-temperature history is read once, checked, converted to
SI (temperatures in degC) and kept as a :class:`Series` on a UTC time axis.
A :class:`Forcing` then gives one boundary quantity as a function of time:
a constant, a column of the series (linear interpolation), or a generated
daily cycle (:func:`daily_cycle`).

Reading rules
-------------
Times
    ISO 8601, naive (``2026-07-01T13:00``, ``2026-07-01 13:00:00``) or with an
    offset (``...Z``, ``...+01:00``, ``...+0100``).  Offsets convert to UTC.
    Naive times are read in ``timezone``: ``"UTC"``, a fixed offset
    (``"+01:00"``) or an IANA name (``"Europe/Berlin"``).
Daylight-saving changes (IANA zones)
    A naive time that does not exist (clocks went forward) is refused.  A time
    that occurs twice (clocks went back) is resolved by the file's order: it is
    read as the first instant (daylight-saving time) until the local clock
    steps back, and as the second instant (standard time) from then on, so an
    hour that is logged twice keeps both halves in order.
Gaps and missing values
    An interval between rows longer than ``max_interval`` (default three times
    the median interval) is a gap.  Empty cells and ``NaN``/``NA`` are missing
    values.  Both are refused unless ``fill_gaps`` is given: then a run of
    missing values is filled by linear interpolation in time when the span
    between the valid values on either side is at most ``fill_gaps``; a gap
    of at most ``fill_gaps`` gets rows inserted at about the median interval,
    filled the same way.  Missing values at the start or end of the file are
    never filled (there is nothing to interpolate from).  :attr:`Series.filled`
    counts the filled values per column.
Missing rows
    An interval between rows longer than :data:`MISSING_ROW_FACTOR` (1.5)
    times the median interval but within ``max_interval`` is accepted and
    bridged by the linear interpolation every series gets between rows.
Every fill is said
    Each kind of fill (missing values filled, missing rows bridged, rows
    inserted into a gap) is one :class:`FilledGaps` in :attr:`Series.gaps`
    and one warning naming the file, the column, how many gaps and values,
    and the first few places (UTC stamps and file rows).
Plausible ranges
    After conversion: temperature -273.15 to 2000 degC, irradiance 0 to
    1500 W/m2, fraction (relative humidity) 0 to 1, speed 0 to 100 m/s.
CSV
    One header row naming the columns; the delimiter (``,``, ``;`` or tab) is
    taken from the header; with ``;`` or tab a decimal comma is accepted.
    Lines starting with ``#`` are comments.  Row numbers in messages are the
    line numbers a spreadsheet shows (header = row 1 when there are no
    comment lines).
netCDF
    Read with xarray; the time variable must decode as CF time (standard
    calendar).  CF times are UTC, so ``timezone`` must be UTC.  A variable's
    ``units`` attribute, when pint can read it, must agree with the unit
    the case file gives.
"""

from __future__ import annotations

import csv
import functools
import hashlib
import io
import math
import re
import warnings
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from datetime import datetime, timedelta
from pathlib import Path
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

import numpy as np

from layers.constants import ABSOLUTE_ZERO_CELSIUS
from layers.errors import CaseError, SeriesError
from layers.formatting import format_duration
from layers.units import KINDS, unit_factor

__all__ = [
    "MISSING_ROW_FACTOR",
    "RANGES",
    "FilledGaps",
    "ColumnSpec",
    "Forcing",
    "Series",
    "daily_cycle",
    "read_series",
]

#: Plausible range of each kind after conversion: kind -> (low, high, unit shown).
#: Values outside are refused; kinds not listed are not range-checked.
RANGES: dict[str, tuple[float, float, str]] = {
    "temperature": (ABSOLUTE_ZERO_CELSIUS, 2000.0, "degC"),
    "irradiance": (0.0, 1500.0, "W/m2"),
    "fraction": (0.0, 1.0, "1"),
    "speed": (0.0, 100.0, "m/s"),
}

#: An interval between rows longer than this many times the median interval holds
#: missing rows (reported; within ``max_interval`` they are bridged, not refused).
MISSING_ROW_FACTOR = 1.5
#: How many places a gap report lists before "and N more".
GAPS_SHOWN = 3

_NETCDF_SUFFIXES = {".nc", ".nc4", ".netcdf", ".cdf"}
_MISSING_TOKENS = {"", "nan", "na", "n/a", "#n/a", "null", "none"}
_ISO = re.compile(
    r"\s*(\d{4}-\d{2}-\d{2})"
    r"(?:[T ](\d{2}(?::\d{2}(?::\d{2}(?:[.,]\d+)?)?)?))?"
    r"\s*(Z|[+-]\d{2}(?::?\d{2})?)?\s*$"
)
_OFFSET = re.compile(r"(?:UTC|GMT)?\s*([+-])(\d{1,2})(?::?(\d{2}))?$")
_EPOCH = datetime(1970, 1, 1)
_NUMBER = re.compile(r"\s*[+-]?\d+(?:\.\d*)?(?:[eE][+-]?\d+)?\s*")
_EPOCH64 = np.datetime64("1970-01-01T00:00:00", "s")


@dataclass(frozen=True)
class ColumnSpec:
    """One column of a series file, as the case file names it.

    Parameters
    ----------
    name : str
        The name the case file uses (``"series:NAME"``).
    column : str
        The column header (CSV) or variable name (netCDF) in the file.
    unit : str
        The unit of the numbers in the file, e.g. ``"degC"``, ``"W/m2"``, ``"%"``.
    kind : str
        ``"temperature"`` or a key of :data:`layers.units.KINDS`
        (``"irradiance"``, ``"fraction"``, ``"speed"``, ``"heat_flux"``...).
    """

    name: str
    column: str
    unit: str
    kind: str


@dataclass(frozen=True)
class FilledGaps:
    """Gaps of one kind that reading a series filled by linear interpolation in time.

    Attributes
    ----------
    file : str
        The series file.
    column : str
        What was filled: ``"column T_out"`` (missing values), or the time
        column for missing rows (every column is interpolated across them).
    kind : str
        ``"missing values"`` or ``"missing rows"``.
    gaps : int
        How many separate gaps.
    values : int
        How many values were filled (missing values), or about how many rows
        were missing (missing rows).
    places : tuple of str
        One text per gap: its first UTC stamp and where it is in the file.
    """

    file: str
    column: str
    kind: str
    gaps: int
    values: int
    places: tuple[str, ...]

    def describe(self) -> str:
        """One line: file, column, counts and the first :data:`GAPS_SHOWN` places."""
        shown = ", ".join(self.places[:GAPS_SHOWN])
        more = f", and {len(self.places) - GAPS_SHOWN} more" if len(self.places) > GAPS_SHOWN else ""
        plural = "s" if self.gaps != 1 else ""
        if self.kind == "missing rows":
            what = f"{self.gaps} gap{plural} of missing rows (about {self.values} row{'s' if self.values != 1 else ''}) bridged"
        else:
            what = f"{self.gaps} gap{plural} of missing values ({self.values} value{'s' if self.values != 1 else ''}) filled"
        return f"{self.file}: {self.column}: {what} by linear interpolation in time: {shown}{more}"


@dataclass
class Series:
    """A checked time series in SI on a UTC time axis.

    Attributes
    ----------
    time : numpy.ndarray
        Time stamps, ``datetime64[s]``, UTC, strictly increasing.
    values : dict[str, numpy.ndarray]
        Values per column name, SI (temperatures [degC]), no NaN.
    kinds : dict[str, str]
        Kind of each column (``"temperature"``, ``"irradiance"``...).
    file : str
        The file read.
    sha256 : str
        Hex digest of the file's bytes (provenance).
    filled : dict[str, int]
        How many values of each column were filled by interpolation.
    units : dict[str, str]
        The unit each column was written in, in the file.
    gaps : tuple of FilledGaps
        Every gap filled or bridged, by kind and column (also warned).
    time_form : str
        How the file writes its stamps: ``"naive"``, ``"offsets +01:00, ..."``
        (the distinct offsets) or ``"cf"`` (netCDF CF times, UTC).
    timezone : str
        The zone naive stamps were read in.
    """

    time: np.ndarray
    values: dict[str, np.ndarray]
    kinds: dict[str, str]
    file: str
    sha256: str
    embedded: str | None = field(default=None, kw_only=True)  # the file's text, when the case embeds it
    filled: dict[str, int] = field(default_factory=dict)
    units: dict[str, str] = field(default_factory=dict)
    gaps: tuple[FilledGaps, ...] = ()
    time_form: str = "naive"
    timezone: str = "UTC"

    def seconds_since(self, start: np.datetime64) -> np.ndarray:
        """Time of each row after ``start`` [s] (negative before it)."""
        return (self.time - np.datetime64(start)) / np.timedelta64(1, "s")

    def span(self) -> tuple[np.datetime64, np.datetime64]:
        """First and last time stamp (UTC)."""
        return self.time[0], self.time[-1]


# ---------------------------------------------------------------------------
# small helpers


def _iso(t: np.datetime64) -> str:
    """A UTC time stamp as ``2026-07-01T13:00Z`` (seconds only when not zero)."""
    text = str(np.datetime64(t, "s"))
    if text.endswith(":00"):
        text = text[:-3]
    return text + "Z"


def _show(value: float) -> str:
    return f"{value:.6g}"


#: Years a time axis may span: datetime64[ns] holds 1678 to 2261; no weather or
#: process record of a construction falls outside this narrower range.
YEARS = (1800, 2200)
_YEAR_SECONDS = (
    int((datetime(YEARS[0], 1, 1) - datetime(1970, 1, 1)).total_seconds()),
    int((datetime(YEARS[1] + 1, 1, 1) - datetime(1970, 1, 1)).total_seconds()),
)


def check_years(seconds: np.ndarray, where: Callable[[int], tuple[str, str]]) -> None:
    """Refuse times outside :data:`YEARS` [s since 1970, UTC]."""
    outside = np.flatnonzero((seconds < _YEAR_SECONDS[0]) | (seconds >= _YEAR_SECONDS[1]))
    if outside.size:
        i = int(outside[0])
        stamp = np.datetime_as_string(np.datetime64(int(seconds[i]), "s"), unit="m")
        raise SeriesError(*where(i), f"{stamp} is outside the years {YEARS[0]} to {YEARS[1]} that a time axis holds")


@functools.cache
def _zone_names() -> frozenset[str]:
    """The IANA zone names this machine knows."""
    from zoneinfo import available_timezones

    return frozenset(available_timezones())


class Clock:
    """How naive local times become UTC: a fixed offset or an IANA zone.

    One reader of time-zone names for the case and its series: ``UTC`` (or
    ``Z``, ``GMT``), a fixed offset ``+HH:MM`` up to 18 h, or an IANA zone
    name (``Europe/Berlin``); nothing else (``localtime`` is not a zone).
    """

    def __init__(self, text: str, *, file: str, key: str) -> None:
        self.text = text
        self.offset = 0  # [s], used when zone is None
        self.zone: ZoneInfo | None = None
        name = str(text).strip()
        if name.upper() in ("UTC", "Z", "GMT"):
            return
        m = _OFFSET.fullmatch(name)
        if m:
            sign, hours, minutes = m.groups()
            off = int(hours) * 3600 + int(minutes or 0) * 60
            if off > 18 * 3600 or int(minutes or 0) >= 60:
                raise SeriesError(file, key, f"offset {text!r} is out of range (use +HH:MM up to 18 h)")
            self.offset = off if sign == "+" else -off
            return
        try:
            if name in ("localtime", "posixrules", "Factory") or name not in _zone_names():
                raise ZoneInfoNotFoundError(name)
            self.zone = ZoneInfo(name)
        except (ZoneInfoNotFoundError, ValueError):
            raise SeriesError(
                file, key, f"unknown time zone {text!r} (use 'UTC', an offset like '+01:00' or an IANA name like 'Europe/Berlin')"
            ) from None

    @property
    def is_utc(self) -> bool:
        return self.zone is None and self.offset == 0

    def standard_offset(self) -> int:
        """Offset from UTC without daylight saving [s] (for generated cycles)."""
        if self.zone is None:
            return self.offset
        probe = datetime(2001, 1, 15, 12, tzinfo=self.zone)
        return int((probe.utcoffset() - (probe.dst() or timedelta(0))).total_seconds())

    def _zone_offset(self, local_seconds: int, fold: int) -> int:
        wall = (_EPOCH + timedelta(seconds=int(local_seconds))).replace(tzinfo=self.zone, fold=fold)
        return int(wall.utcoffset().total_seconds())

    def localize(self, stamp: datetime, where: tuple[str, str]) -> np.datetime64:
        """A naive local date-time as UTC (seconds)."""
        local = np.array([int((stamp - _EPOCH).total_seconds())], dtype=np.int64)
        utc = self.to_utc(local, lambda i: where)
        check_years(utc, lambda i: where)
        return np.datetime64(int(utc[0]), "s")

    def to_utc(self, local: np.ndarray, where: Callable[[int], tuple[str, str]]) -> np.ndarray:
        """Naive local times [s since 1970 on the wall clock] -> UTC [s since 1970].

        ``where(i)`` gives the (file, key) of row ``i`` for error messages.
        """
        if self.zone is None:
            return local - self.offset
        # The offset is constant within a local day except on the (rare) days
        # of a change: find those from the offsets at consecutive midnights and
        # look at every row only there.
        days = local // 86400
        unique_days, inverse = np.unique(days, return_inverse=True)
        at_start = np.array([self._zone_offset(d * 86400, 0) for d in unique_days], dtype=np.int64)
        at_end = np.array([self._zone_offset((d + 1) * 86400, 0) for d in unique_days], dtype=np.int64)
        offsets = at_start[inverse]
        for k in np.flatnonzero(at_start != at_end):
            previous_ambiguous = None
            second_pass = False
            for i in np.flatnonzero(inverse == k):
                before = self._zone_offset(local[i], 0)
                after = self._zone_offset(local[i], 1)
                if before == after:
                    offsets[i] = before
                elif before < after:  # a gap: the clocks went forward over this time
                    wall = _EPOCH + timedelta(seconds=int(local[i]))
                    raise SeriesError(
                        *where(int(i)),
                        f"local time {wall.isoformat(timespec='minutes')} does not exist in {self.text} "
                        "(the clocks went forward); write the times with a UTC offset, or set "
                        "series.timezone to a fixed offset such as '+01:00'",
                    )
                else:  # repeated hour: first pass is daylight-saving time, then standard time
                    if previous_ambiguous is not None and local[i] <= local[previous_ambiguous]:
                        second_pass = True
                    offsets[i] = after if second_pass else before
                    previous_ambiguous = i
        return local - offsets


def _check_unit(spec: ColumnSpec, *, case_file: str, file: str) -> tuple[float, float]:
    """Scale and offset from the column's unit to SI, refusing a unit that does not fit."""
    key = f"series.columns.{spec.name}.unit"
    if spec.kind != "temperature" and spec.kind not in KINDS:
        raise SeriesError(case_file, f"series.columns.{spec.name}", f"unknown kind {spec.kind!r}")
    try:
        return unit_factor(spec.unit, spec.kind, file=case_file, key=key)
    except CaseError as exc:
        reason = exc.reason
    except Exception as exc:  # pint raises several unrelated types for unreadable units
        reason = f"cannot read unit {spec.unit!r} ({exc})"
    raise SeriesError(case_file, key, f"column {spec.column!r} of {file}: {reason}")


# ---------------------------------------------------------------------------
# file readers: each returns UTC seconds, raw columns and a row namer


@dataclass
class _Raw:
    seconds: np.ndarray  # int64, UTC, file order
    columns: dict[str, np.ndarray]  # file column -> float64, unconverted
    row: Callable[[int], str]  # index -> "row 14" / "time[13]"
    column: Callable[[str], str]  # name -> "column T_out" / "variable T_out"
    form: str = "naive"  # how the stamps were written: "naive", "offsets +01:00, ..." or "cf" (netCDF, UTC)


def _offset_text(seconds: int) -> str:
    """A UTC offset [s] as ``+01:00`` (``Z`` for zero)."""
    if seconds == 0:
        return "Z"
    sign = "+" if seconds > 0 else "-"
    hours, minutes = divmod(abs(int(seconds)) // 60, 60)
    return f"{sign}{hours:02d}:{minutes:02d}"


def _parse_times(texts: list[str], clock: Clock, where: Callable[[int], tuple[str, str]]) -> tuple[np.ndarray, str]:
    """ISO 8601 strings -> UTC seconds since 1970 (int64), within :data:`YEARS`,
    and how the stamps were written: ``"naive"`` or ``"offsets ..."`` (the
    distinct offsets).  A column that mixes the two is refused."""
    seconds, form = _iso_seconds(texts, clock, where)
    check_years(seconds, where)
    return seconds, form


def _iso_seconds(texts: list[str], clock: Clock, where: Callable[[int], tuple[str, str]]) -> tuple[np.ndarray, str]:
    if texts and all(_NUMBER.fullmatch(t) for t in texts[:3]):
        raise SeriesError(
            *where(0),
            f"{texts[0]!r} is a number, not a time; if the column holds seconds since 1970 (Unix time), "
            "write them as ISO 8601 times (e.g. 2026-07-01T13:00Z) or in a netCDF file with CF time units",
        )
    if texts and min(map(len, texts)) >= 10:
        # fast path: numpy reads naive ISO 8601 itself; it warns on (and we
        # then take the slow path for) offsets, and gives NaT for empty cells
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("error")
                stamps = np.array(texts, dtype="datetime64[ms]")
        except (ValueError, Warning):
            stamps = None
        if stamps is not None and not np.isnat(stamps).any():
            seconds = (stamps.astype(np.int64) + 500) // 1000
            return (seconds if clock.is_utc else clock.to_utc(seconds, where)), "naive"
    n = len(texts)
    bases: list[str] = [""] * n
    offsets = np.zeros(n, dtype=np.int64)
    naive = np.zeros(n, dtype=bool)
    match = _ISO.match
    hint = "expected ISO 8601 such as 2026-07-01T13:00, 2026-07-01 13:00:00 or 2026-07-01T13:00+01:00"
    for i, text in enumerate(texts):
        m = match(text)
        if m is None:
            raise SeriesError(*where(i), f"cannot read {text!r} as a time ({hint})")
        date, clock_time, zone = m.groups()
        bases[i] = date if clock_time is None else f"{date}T{clock_time.replace(',', '.')}"
        if zone is None:
            naive[i] = True
        elif zone != "Z":
            hours, minutes = int(zone[1:3]), int(zone[-2:]) if len(zone) > 3 else 0
            if hours > 18 or minutes >= 60:
                raise SeriesError(*where(i), f"offset {zone!r} of {text!r} is out of range (use +HH:MM up to 18 h)")
            offsets[i] = (hours * 3600 + minutes * 60) * (1 if zone[0] == "+" else -1)
    try:
        stamps = np.array(bases, dtype="datetime64[ms]")
    except ValueError:
        for i, base in enumerate(bases):
            try:
                np.datetime64(base, "ms")
            except ValueError:
                raise SeriesError(*where(i), f"cannot read {texts[i]!r} as a time ({hint})") from None
        raise
    if naive.any() and not naive.all():
        # one file, one convention: a mix is a sign of files joined from two sources,
        # and the zone of the naive stamps beside the offsets would be a guess
        first_naive, first_offset = int(np.argmax(naive)), int(np.argmax(~naive))
        i, j = max(first_naive, first_offset), min(first_naive, first_offset)
        file, key = where(i)
        other = where(j)[1].split(",")[0]
        has, lacks = ("has no UTC offset", "has one") if naive[i] else ("has a UTC offset", "has none")
        raise SeriesError(
            file, key,
            f"{texts[i].strip()!r} {has} while {other} ({texts[j].strip()!r}) {lacks}: write every time stamp "
            f"of the column with an offset or every one without (then series.timezone says their zone)",
        )
    ms = stamps.astype(np.int64)
    seconds = (ms + 500) // 1000  # round sub-second stamps to the nearest second
    seconds = seconds - offsets
    if naive.any():
        if not clock.is_utc:
            seconds = clock.to_utc(seconds, where)
        return seconds, "naive"
    return seconds, "offsets " + ", ".join(_offset_text(int(o)) for o in np.unique(offsets)[::-1])


def _to_floats(texts: list[str], decimal_comma: bool, where: Callable[[int], tuple[str, str]]) -> np.ndarray:
    """Cells -> float64; empty and NA-like cells -> NaN; other text is refused."""
    try:
        return np.array(texts, dtype=np.float64)
    except ValueError:
        pass
    out = np.empty(len(texts), dtype=np.float64)
    for i, text in enumerate(texts):
        cell = text.strip()
        try:
            out[i] = float(cell)
            continue
        except ValueError:
            pass
        if cell.lower() in _MISSING_TOKENS:
            out[i] = math.nan
            continue
        if decimal_comma and cell.count(",") == 1 and "." not in cell:
            try:
                out[i] = float(cell.replace(",", "."))
                continue
            except ValueError:
                pass
        raise SeriesError(*where(i), f"cannot read {text!r} as a number")
    return out


def _sniff_delimiter(header: str) -> str:
    counts = {d: header.count(d) for d in (",", ";", "\t")}
    best = max(counts, key=counts.get)
    return best if counts[best] else ","


def _read_csv(data: bytes, file: str, time: str, columns: list[str], clock: Clock) -> _Raw:
    if data[:2] in (b"\xff\xfe", b"\xfe\xff") or data[:4000].count(b"\x00") > len(data[:4000]) // 8:
        raise SeriesError(file, "(file)", "is UTF-16 (or another wide encoding); save it as UTF-8 text (in a spreadsheet: CSV UTF-8)")
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError:
        text = data.decode("latin-1")  # spreadsheet exports on Windows (a "°C" in a header)
    # The header is the first line that is neither blank nor a comment.
    header_line = next((ln for ln in io.StringIO(text) if ln.strip() and not ln.lstrip().startswith("#")), None)
    if header_line is None:
        raise SeriesError(file, "row 1", "the file is empty (expected a header row naming the columns)")
    delimiter = _sniff_delimiter(header_line)
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delimiter)
    header: list[str] = []
    header_row = 0
    for row in reader:
        if row and any(c.strip() for c in row) and not row[0].lstrip().startswith("#"):
            header = [c.strip() for c in row]
            header_row = reader.line_num
            break
    present = ", ".join(repr(h) for h in header)

    def index_of(name: str, what: str) -> int:
        hits = [i for i, h in enumerate(header) if h == name]
        if len(hits) == 1:
            return hits[0]
        if len(hits) > 1:
            raise SeriesError(file, f"row {header_row}, column {name}", f"the header names column {name!r} {len(hits)} times")
        near = [h for h in header if h.lower() == name.lower()]
        also = f" (did you mean {near[0]!r}? names are case-sensitive)" if near else ""
        raise SeriesError(file, f"row {header_row}, column {name}", f"no {what} column {name!r}{also}; the columns are: {present}")

    ti = index_of(time, "time")
    wanted = list(dict.fromkeys(columns))
    indices = [index_of(c, "data") for c in wanted]
    need = max([ti, *indices])
    rows: list[list[str]] = []
    lines: list[int] = []
    width = len(header)
    for row in reader:
        if len(row) > width and any(c.strip() for c in row[width:]) and not row[0].lstrip().startswith("#"):
            raise SeriesError(
                file,
                f"row {reader.line_num}",
                f"has {len(row)} fields but the header names {width} columns (a stray delimiter, or a shifted row?)",
            )
        rows.append(row)
        lines.append(reader.line_num)
    if not all(len(row) > need and row[ti] and row[0][:1] != "#" for row in rows):
        # slow path: drop comments and blank lines, pad short rows with empty cells
        kept_rows: list[list[str]] = []
        kept_lines: list[int] = []
        for row, line in zip(rows, lines):
            if not row or row[0].lstrip().startswith("#"):
                continue
            if len(row) <= need or not row[ti].strip():
                if not any(c.strip() for c in row):
                    continue  # a blank line, or a row of empty cells at the end of an export
                row = row + [""] * (need + 1 - len(row))
            kept_rows.append(row)
            kept_lines.append(line)
        rows, lines = kept_rows, kept_lines
    times = [row[ti] for row in rows]
    cells = [[row[i] for row in rows] for i in indices]
    del rows
    if not lines:
        raise SeriesError(file, f"row {header_row + 1}", "the file has a header but no data rows")
    line_numbers = np.asarray(lines)
    decimal_comma = delimiter != ","
    seconds, form = _parse_times(times, clock, lambda i: (file, f"row {lines[i]}, column {time}"))
    raw = {
        name: _to_floats(store, decimal_comma, lambda i, name=name: (file, f"row {lines[i]}, column {name}"))
        for name, store in zip(wanted, cells)
    }
    return _Raw(seconds, raw, lambda i: f"row {line_numbers[i]}", lambda c: f"column {c}", form)


def _check_declared_unit(declared: object, spec: ColumnSpec, factor: tuple[float, float], file: str, case_file: str) -> None:
    """Refuse a netCDF variable whose ``units`` attribute contradicts the case file."""
    if not isinstance(declared, str) or not declared.strip():
        return
    try:
        theirs = unit_factor(declared.strip(), spec.kind, file=file, key=spec.column)
    except Exception:  # a CF unit string pint cannot read: nothing to compare
        return
    if not np.allclose(theirs, factor, rtol=1e-9, atol=1e-9):
        raise SeriesError(
            case_file,
            f"series.columns.{spec.name}.unit",
            f"the case gives unit {spec.unit!r} but variable {spec.column!r} of {file} declares units {declared!r}",
        )


def _read_netcdf(path: Path, file: str, time: str, specs: Sequence[ColumnSpec], factors: dict[str, tuple[float, float]], clock: Clock, case_file: str) -> _Raw:
    import xarray as xr

    if not clock.is_utc:
        raise SeriesError(
            case_file,
            "series.timezone",
            f"{file} is netCDF, whose CF times are UTC (or carry their offset in the units); "
            f"timezone {clock.text!r} does not apply: remove it or set it to 'UTC'",
        )
    try:
        ds = xr.open_dataset(path, decode_times=True)
    except Exception as exc:  # the backends raise many types for unreadable files
        raise SeriesError(file, "series.file", f"cannot read as netCDF ({exc})") from None
    with ds:
        present = ", ".join(repr(str(v)) for v in ds.variables)
        if time not in ds.variables:
            raise SeriesError(file, f"variable {time}", f"no time variable {time!r}; the variables are: {present}")
        tv = ds[time]
        if tv.ndim != 1:
            raise SeriesError(file, f"variable {time}", f"the time variable must be one-dimensional, it has dimensions {tv.dims}")
        if tv.dtype.kind != "M":
            if tv.dtype.kind == "O":
                reason = "times use a non-standard calendar; only the standard (Gregorian) calendar is supported"
            else:
                reason = "times did not decode as CF time: give the variable units like 'hours since 2026-01-01 00:00:00'"
            raise SeriesError(file, f"variable {time}", reason)
        stamps = tv.values
        bad = np.flatnonzero(np.isnat(stamps))
        if bad.size:
            raise SeriesError(file, f"{time}[{bad[0]}], variable {time}", "missing time (NaT)")
        ms = stamps.astype("datetime64[ms]").astype(np.int64)
        seconds = (ms + 500) // 1000
        check_years(seconds, lambda i: (file, f"{time}[{i}], variable {time}"))
        raw: dict[str, np.ndarray] = {}
        for spec in specs:
            if spec.column in raw:
                continue
            if spec.column not in ds.variables:
                raise SeriesError(file, f"variable {spec.column}", f"no data variable {spec.column!r}; the variables are: {present}")
            var = ds[spec.column]
            if var.dims != tv.dims:
                raise SeriesError(
                    file, f"variable {spec.column}", f"must have the dimension of the time variable {tv.dims}, it has {var.dims}"
                )
            _check_declared_unit(var.attrs.get("units"), spec, factors[spec.name], file, case_file)
            try:
                raw[spec.column] = np.asarray(var.values, dtype=np.float64)
            except (TypeError, ValueError):
                raise SeriesError(file, f"variable {spec.column}", f"is not numeric (dtype {var.dtype})") from None
    return _Raw(seconds, raw, lambda i: f"{time}[{i}]", lambda c: f"variable {c}", "cf")


def _is_netcdf(path: Path, data: bytes) -> bool:
    return path.suffix.lower() in _NETCDF_SUFFIXES or data[:3] == b"CDF" or data[:4] == b"\x89HDF"


# ---------------------------------------------------------------------------
# checks shared by both formats


def _check_order(t: np.ndarray, raw: _Raw, file: str, time: str) -> None:
    step = np.diff(t)
    bad = np.flatnonzero(step <= 0)
    if not bad.size:
        return
    i = int(bad[0]) + 1
    key = f"{raw.row(i)}, {raw.column(time)}"
    if step[i - 1] == 0:
        raise SeriesError(file, key, f"duplicate time {_iso(t[i] + _EPOCH64)} (same as {raw.row(i - 1)})")
    raise SeriesError(
        file,
        key,
        f"time {_iso(t[i] + _EPOCH64)} is earlier than {_iso(t[i - 1] + _EPOCH64)} in {raw.row(i - 1)}: "
        "rows must be in time order",
    )


#: Share of a file's intervals that one interval must make up for the file to be regular.
REGULAR_SHARE = 0.8


def _missing_rows(t: np.ndarray, raw: _Raw, file: str, time: str) -> FilledGaps | None:
    """The intervals between rows longer than :data:`MISSING_ROW_FACTOR` times the
    file's usual interval (rows missing from a regular file), or None; call
    before :func:`_bridge_gaps`, on the file's own rows.  A file is regular
    when one interval makes up at least :data:`REGULAR_SHARE` of them; a file
    whose steps vary on purpose has no rows "missing"."""
    step = np.diff(t)
    if step.size < 4:
        return None
    values, counts = np.unique(step, return_counts=True)
    if counts.max() < REGULAR_SHARE * step.size:
        return None
    median = float(values[int(np.argmax(counts))])  # the usual interval
    long = np.flatnonzero(step > MISSING_ROW_FACTOR * median)
    if not long.size or median <= 0:
        return None
    rows = [max(int(round(step[g] / median)) - 1, 1) for g in long]
    places = tuple(
        f"after {_iso(t[g] + _EPOCH64)} ({raw.row(int(g))}, {format_duration(float(step[g]), approximate=True)} to the next row)"
        for g in long
    )
    column = f"{raw.column(time)} (usual interval {format_duration(median, approximate=True)})"
    return FilledGaps(file, column, "missing rows", int(long.size), int(sum(rows)), places)


def _bridge_gaps(t: np.ndarray, raw: _Raw, file: str, time: str, fill_gaps: float | None, max_interval: float | None) -> tuple[np.ndarray, np.ndarray]:
    """Refuse gaps, or insert rows (to be filled) into gaps no longer than ``fill_gaps``.

    Returns the new times and, per row, its index in the file (-1 for an inserted row).
    """
    step = np.diff(t)
    median = float(np.median(step))
    limit = max_interval if max_interval is not None else 3.0 * median
    origin = np.arange(t.size)
    gaps = np.flatnonzero(step > limit)
    if not gaps.size:
        return t, origin
    unfillable = gaps if fill_gaps is None else gaps[step[gaps] > fill_gaps]
    if unfillable.size:
        i = int(unfillable[0]) + 1
        rule = (
            f"max_interval {format_duration(limit, approximate=True)}"
            if max_interval is not None
            else f"the default limit, 3 x the median interval of {format_duration(median, approximate=True)}"
        )
        if fill_gaps is None:
            advice = "set series.max_interval if the steps vary on purpose, or series.fill_gaps to interpolate across it"
        else:
            advice = f"it is also longer than fill_gaps {format_duration(fill_gaps, approximate=True)}, so it is not filled"
        more = f" ({unfillable.size - 1} more gaps like it)" if unfillable.size > 1 else ""
        raise SeriesError(
            file,
            f"{raw.row(i)}, {raw.column(time)}",
            f"gap of {format_duration(step[i - 1], approximate=True)} after {raw.row(i - 1)} ({_iso(t[i - 1] + _EPOCH64)} to "
            f"{_iso(t[i] + _EPOCH64)}) is longer than {rule}{more}; {advice}",
        )
    nominal = max(median, 1.0)
    positions: list[int] = []
    inserted: list[int] = []
    for g in gaps:
        span = int(step[g])
        count = max(int(round(span / nominal)) - 1, 1)
        for k in range(1, count + 1):
            positions.append(int(g) + 1)
            inserted.append(int(t[g]) + int(round(k * span / (count + 1))))
    return np.insert(t, positions, inserted), np.insert(origin, positions, -1)


def _fill_missing(
    t: np.ndarray, v: np.ndarray, origin: np.ndarray, raw: _Raw, file: str, column: str, fill_gaps: float | None
) -> tuple[int, FilledGaps | None]:
    """Fill NaN runs in place by linear interpolation in time; return how many
    values were filled (rows inserted into bridged gaps included) and the
    report of the runs that hold values missing from the file's own rows."""
    missing = np.isnan(v)
    if not missing.any():
        return 0, None

    def row(i: int) -> str:
        if origin[i] >= 0:
            return raw.row(int(origin[i]))
        before = origin[:i][origin[:i] >= 0][-1]
        after = origin[i:][origin[i:] >= 0][0]
        return f"between {raw.row(int(before))} and {raw.row(int(after))}"

    edges = np.diff(np.concatenate(([0], missing.view(np.int8), [0])))
    starts = np.flatnonzero(edges == 1)
    ends = np.flatnonzero(edges == -1) - 1  # inclusive
    n = v.size
    where = f"{raw.column(column)}"
    for s, e in zip(starts, ends):
        count = e - s + 1
        if s == 0 or e == n - 1:
            side = "start" if s == 0 else "end"
            raise SeriesError(
                file,
                f"{row(int(s))}, {where}",
                f"empty or NaN value ({count} in a row) at the {side} of the series, where there is no value on "
                "both sides to interpolate from; trim the file or supply the values",
            )
        span = float(t[e + 1] - t[s - 1])
        if fill_gaps is None or span > fill_gaps:
            rule = (
                "set series.fill_gaps to fill short runs by linear interpolation"
                if fill_gaps is None
                else f"longer than fill_gaps {format_duration(fill_gaps, approximate=True)}"
            )
            raise SeriesError(
                file,
                f"{row(int(s))}, {where}",
                f"empty or NaN value ({count} in a row, {format_duration(span, approximate=True)} between the valid values on either side): {rule}",
            )
    valid = ~missing
    v[missing] = np.interp(t[missing].astype(np.float64), t[valid].astype(np.float64), v[valid])
    places: list[str] = []
    count = 0
    for s, e in zip(starts, ends):
        real = origin[s:e + 1] >= 0  # cells of the file's own rows (not rows inserted into a gap)
        if not real.any():
            continue
        count += int(real.sum())
        first = s + int(np.argmax(real))
        n = int(real.sum())
        places.append(f"{_iso(t[first] + _EPOCH64)} ({raw.row(int(origin[first]))}{f', {n} values in a row' if n > 1 else ''})")
    report = FilledGaps(file, where, "missing values", len(places), count, tuple(places)) if places else None
    return int(missing.sum()), report


def _check_range(v: np.ndarray, spec: ColumnSpec, raw_values: np.ndarray, raw: _Raw, file: str) -> None:
    finite = np.isfinite(v) | np.isnan(v)
    if not finite.all():
        i = int(np.flatnonzero(~finite)[0])
        raise SeriesError(file, f"{raw.row(i)}, {raw.column(spec.column)}", f"value {raw_values[i]} is not a finite number")
    if spec.kind not in RANGES:
        return
    low, high, shown = RANGES[spec.kind]
    with np.errstate(invalid="ignore"):
        outside = (v < low) | (v > high)
    if not outside.any():
        return
    i = int(np.flatnonzero(outside)[0])
    more = int(outside.sum()) - 1
    converted = "" if spec.unit == shown else f" = {_show(v[i])} {shown}"
    hint = ""
    if spec.kind == "fraction" and v[i] > 1 and spec.unit.strip() in ("1", ""):
        hint = "; relative humidity in per cent needs unit = '%'"
    raise SeriesError(
        file,
        f"{raw.row(i)}, {raw.column(spec.column)}",
        f"{_show(raw_values[i])} {spec.unit}{converted} is outside the plausible range for "
        f"{spec.kind.replace('_', ' ')}, {_show(low)} to {_show(high)} {shown}"
        f"{f' ({more} more values outside)' if more else ''}{hint}",
    )


# ---------------------------------------------------------------------------
# public API


def read_series(
    path: str | Path,
    columns: Sequence[ColumnSpec],
    *,
    time: str = "time",
    timezone: str = "UTC",
    fill_gaps: float | None = None,
    max_interval: float | None = None,
    case_file: str = "<case>",
) -> Series:
    """Read, check and convert a CSV or netCDF time series.

    Parameters
    ----------
    path : str or pathlib.Path
        The series file (``.nc``/``.nc4``/``.cdf`` or netCDF bytes: netCDF; otherwise CSV).
    columns : sequence of ColumnSpec
        The columns to read, with their units and kinds.
    time : str
        Name of the time column (CSV) or variable (netCDF).
    timezone : str
        How to read naive CSV times: ``"UTC"``, ``"+01:00"`` or an IANA name.
    fill_gaps : float, optional
        Longest span filled by linear interpolation [s]; default: fill nothing.
    max_interval : float, optional
        Longest interval between rows that is not a gap [s]; default three
        times the median interval.
    case_file : str
        The case file, named in messages about its keys.

    Returns
    -------
    Series
        Times in UTC (``datetime64[s]``), values in SI (temperatures [degC]).

    Raises
    ------
    SeriesError
        For every problem in the file, naming the file, the row and the column.
    """
    path = Path(path)
    file = str(path)
    clock = Clock(timezone, file=case_file, key="series.timezone")
    for key, value in (("series.fill_gaps", fill_gaps), ("series.max_interval", max_interval)):
        if value is not None and not (math.isfinite(value) and value > 0):
            raise SeriesError(case_file, key, f"must be a positive duration, got {value!r} s")
    names = [spec.name for spec in columns]
    if len(set(names)) != len(names):
        raise SeriesError(case_file, "series.columns", f"a name is used twice: {names}")
    factors = {spec.name: _check_unit(spec, case_file=case_file, file=file) for spec in columns}

    if not path.exists():
        raise SeriesError(file, "series.file", f"file not found (looked for {path.resolve()}; named in {case_file})")
    if not path.is_file():
        raise SeriesError(file, "series.file", "is not a file")
    data = path.read_bytes()
    digest = hashlib.sha256(data).hexdigest()

    if _is_netcdf(path, data):
        del data
        raw = _read_netcdf(path, file, time, columns, factors, clock, case_file)
    else:
        raw = _read_csv(data, file, time, [spec.column for spec in columns], clock)
        del data

    t = raw.seconds
    if t.size < 2:
        raise SeriesError(file, f"{raw.row(0)}, {raw.column(time)}", "a series needs at least two rows")
    _check_order(t, raw, file, time)
    rows_report = _missing_rows(t, raw, file, time)
    t, origin = _bridge_gaps(t, raw, file, time, fill_gaps, max_interval)
    real = origin >= 0

    values: dict[str, np.ndarray] = {}
    filled: dict[str, int] = {}
    reports: list[FilledGaps] = [rows_report] if rows_report is not None else []
    for spec in columns:
        a, b = factors[spec.name]
        file_values = raw.columns[spec.column]
        _check_range(a * file_values + b, spec, file_values, raw, file)
        v = np.full(t.size, np.nan)
        v[real] = a * file_values + b
        filled[spec.name], report = _fill_missing(t, v, origin, raw, file, spec.column, fill_gaps)
        if report is not None and all(r.column != report.column for r in reports):  # a column used twice: once
            reports.append(report)
        values[spec.name] = v
    for report in reports:
        warnings.warn(report.describe(), UserWarning, stacklevel=2)
    return Series(
        time=t.astype("datetime64[s]"),
        values=values,
        kinds={spec.name: spec.kind for spec in columns},
        file=file,
        sha256=digest,
        filled=filled,
        units={spec.name: spec.unit for spec in columns},
        gaps=tuple(reports),
        time_form=raw.form,
        timezone=clock.text,
    )


def daily_cycle(
    mean: float, amplitude: float, peak_hour: float, period: float = 86400.0, *, timezone: str = "UTC"
) -> Callable[[np.ndarray], np.ndarray]:
    """A generated cosine cycle: ``mean + amplitude * cos(2 pi (s - peak_hour * 3600) / period)``.

    ``s`` is the time in seconds since midnight of 1970-01-01 on the clock of
    ``timezone``; for a 24 h period this is the hour-of-day form
    ``mean + amplitude * cos(2 pi (h - peak_hour) / 24)``.  An IANA zone is
    used at its standard offset (no daylight saving), so the cycle has no jump
    at a clock change.

    Parameters
    ----------
    mean : float
        Mean over a period [degC] (or the SI unit of the quantity).
    amplitude : float
        Half the peak-to-trough swing [K] (or the SI unit of the quantity).
    peak_hour : float
        Hour of the day at which the cycle peaks [h].
    period : float
        Period [s]; default one day.
    timezone : str
        The clock in which ``peak_hour`` is read.

    Returns
    -------
    callable
        ``f(times)`` for ``datetime64`` times, returning floats of the shape of ``times``.
    """
    for label, number in (("mean", mean), ("amplitude", amplitude), ("peak_hour", peak_hour), ("period", period)):
        if not math.isfinite(number):
            raise SeriesError("<case>", "series.cycles", f"{label} must be a finite number, got {number!r}")
    if period <= 0:
        raise SeriesError("<case>", "series.cycles", f"period must be positive, got {period!r} s")
    offset = Clock(timezone, file="<case>", key="series.timezone").standard_offset()
    mean, amplitude, period = float(mean), float(amplitude), float(period)
    peak = float(peak_hour) * 3600.0

    def cycle(times: np.ndarray) -> np.ndarray:
        seconds = (np.asarray(times) - _EPOCH64) / np.timedelta64(1, "s") + offset
        # reduce to one period first so the cosine's argument stays small and exact
        phase = np.mod(seconds - peak, period) / period
        return mean + amplitude * np.cos(2.0 * np.pi * phase)

    cycle.__doc__ = f"daily cycle: mean {mean:g}, amplitude {amplitude:g}, peak at {peak_hour:g} h ({timezone}), period {period:g} s"
    cycle.period = period  # read by Forcing.period
    return cycle


class Forcing:
    """One boundary quantity as a function of time.

    Build it with :meth:`constant`, :meth:`from_series` or :meth:`from_cycle`;
    call it with ``datetime64`` times to get values in SI.
    """

    def __init__(self) -> None:  # use the class methods
        self._value: float | None = None
        self._func: Callable[[np.ndarray], np.ndarray] | None = None
        self._t0: np.datetime64 | None = None
        self._x: np.ndarray | None = None
        self._v: np.ndarray | None = None
        self._origin = ""
        self._case_file = "<case>"
        self._key = "?"

    @classmethod
    def constant(cls, value: float) -> Forcing:
        """A value that does not change [SI]."""
        self = cls()
        self._value = float(value)
        self._origin = f"constant {value:g}"
        return self

    @classmethod
    def from_series(cls, series: Series, name: str, *, case_file: str = "<case>", key: str = "?") -> Forcing:
        """Column ``name`` of ``series``, interpolated linearly in time.

        ``case_file`` and ``key`` name the case-file key that uses it, for the
        message when a run reaches outside the series.
        """
        if name not in series.values:
            known = ", ".join(sorted(series.values)) or "none"
            raise SeriesError(case_file, key, f"no series column named {name!r} in {series.file} (defined: {known})")
        self = cls()
        self._t0 = series.time[0]
        self._x = series.seconds_since(self._t0)
        self._v = np.asarray(series.values[name], dtype=np.float64)
        self._origin = f"series {name!r} from {series.file}"
        self._case_file, self._key = case_file, key
        return self

    @classmethod
    def from_values(cls, times: np.ndarray, values: np.ndarray, origin: str, *, case_file: str = "<case>", key: str = "?") -> Forcing:
        """Values at ``times`` (UTC ``datetime64``, increasing), interpolated
        linearly in time like a series column (e.g. an irradiance transposed
        from the series)."""
        self = cls()
        times = np.asarray(times).astype("datetime64[s]")
        self._t0 = times[0]
        self._x = (times - self._t0) / np.timedelta64(1, "s")
        self._v = np.asarray(values, dtype=np.float64)
        self._origin = origin
        self._case_file, self._key = case_file, key
        return self

    @property
    def times(self) -> np.ndarray | None:
        """The time stamps of a series forcing (UTC), None for a constant or a cycle."""
        return None if self._x is None else self._t0 + (self._x * 1e6).astype("timedelta64[us]")

    @classmethod
    def from_cycle(cls, func: Callable[[np.ndarray], np.ndarray]) -> Forcing:
        """A generated function of time, e.g. from :func:`daily_cycle`."""
        self = cls()
        self._func = func
        self._origin = func.__doc__ or "generated cycle"
        return self

    @property
    def value(self) -> float | None:
        """The value of a constant forcing [SI], None for a series or a cycle."""
        return self._value

    @property
    def period(self) -> float | None:
        """The period of a generated cycle [s], None otherwise."""
        return getattr(self._func, "period", None) if self._func is not None else None

    @property
    def is_cycle(self) -> bool:
        """True for a generated cycle."""
        return self._func is not None

    def linear_between_steps(self, start: np.datetime64, step: float, n_steps: int) -> bool:
        """Whether the forcing is linear between the steps of a run from ``start``
        [UTC] with ``n_steps`` steps of ``step`` [s]: a constant, or a series whose
        samples within the run all fall on step times (a generated cycle is not)."""
        if self._value is not None:
            return True
        if self._func is not None:
            return False
        offset = (start - self._t0) / np.timedelta64(1, "s")
        inside = self._x[(self._x > offset) & (self._x < offset + step * n_steps)] - offset
        steps = inside / step
        return bool(np.all(np.abs(steps - np.round(steps)) < 1e-6))

    def span(self) -> tuple[np.datetime64, np.datetime64] | None:
        """First and last time covered (UTC), or ``None`` when defined at all times."""
        if self._x is None:
            return None
        return self._t0, self._t0 + np.timedelta64(int(self._x[-1]), "s")

    def __call__(self, times: np.ndarray) -> np.ndarray:
        """Values at ``times`` (``datetime64``, UTC) [SI]."""
        times = np.asarray(times)
        if times.dtype.kind != "M":
            raise TypeError(f"Forcing expects datetime64 times, got dtype {times.dtype}")
        if self._value is not None:
            return np.full(times.shape, self._value)
        if self._func is not None:
            return np.asarray(self._func(times), dtype=np.float64)
        x = (times - self._t0) / np.timedelta64(1, "s")
        if np.isnan(x).any():
            raise ValueError("Forcing got a missing time (NaT)")
        if x.size and (x.min() < 0.0 or x.max() > self._x[-1]):
            first, last = self.span()
            raise SeriesError(
                self._case_file,
                self._key,
                f"the run spans {_iso(times.min())} to {_iso(times.max())}, but the {self._origin} "
                f"covers only {_iso(first)} to {_iso(last)}",
            )
        return np.interp(x, self._x, self._v)

    def __repr__(self) -> str:
        return f"Forcing({self._origin})"
