"""Tests for layers.series: reading, checking and interpolating forcing series.

Every bad file is refused with a SeriesError that names the file, the row (as
a spreadsheet shows it: header = row 1) and the column.  Expected values for
good files are written by hand from the file contents (times converted to UTC
by hand), never produced by the code under test.
"""

from __future__ import annotations

import hashlib

import numpy as np
import pytest

from layers.errors import CaseError, SeriesError
from layers.series import ColumnSpec, Forcing, Series, daily_cycle, read_series

T_OUT = ColumnSpec("t_air", "T_out", "degC", "temperature")
SOLAR = ColumnSpec("solar", "I_south", "W/m2", "irradiance")
RH = ColumnSpec("rh", "RH", "%", "fraction")
WIND = ColumnSpec("wind", "v", "m/s", "speed")

HEADER = "time,T_out,I_south\n"


def write(tmp_path, text: str, name: str = "weather.csv"):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def hourly(n: int, start: str = "2026-07-01T00:00") -> list[str]:
    t0 = np.datetime64(start, "s")
    return [str(t0 + np.timedelta64(k, "h"))[:16] for k in range(n)]


def refused(path, columns=(T_OUT,), **kwargs) -> SeriesError:
    with pytest.raises(SeriesError) as info:
        read_series(path, list(columns), **kwargs)
    return info.value


def assert_names(err: SeriesError, path, row: int, column: str) -> None:
    """The message names the file, the spreadsheet row and the column."""
    message = str(err)
    assert str(path) in message
    assert err.key == f"row {row}, column {column}", err.key
    assert f"row {row}" in message and column in message


def utc(text: str) -> np.datetime64:
    return np.datetime64(text, "s")


# ---------------------------------------------------------------------------
# bad files: one test per kind of refusal


def test_missing_file(tmp_path):
    path = tmp_path / "nowhere.csv"
    err = refused(path, case_file="case.toml")
    assert str(path) in str(err)
    assert "not found" in err.reason and "case.toml" in err.reason
    assert isinstance(err, CaseError)  # the command line maps it to exit status 2


def test_missing_time_column_lists_the_columns(tmp_path):
    path = write(tmp_path, "Time,T_out\n2026-07-01T00:00,1\n2026-07-01T01:00,2\n")
    err = refused(path)
    assert_names(err, path, 1, "time")
    assert "'Time'" in err.reason and "'T_out'" in err.reason
    assert "case-sensitive" in err.reason


def test_missing_data_column_lists_the_columns(tmp_path):
    path = write(tmp_path, "time,T_air,I\n2026-07-01T00:00,1,0\n2026-07-01T01:00,2,0\n")
    err = refused(path)
    assert_names(err, path, 1, "T_out")
    assert "'time', 'T_air', 'I'" in err.reason


@pytest.mark.parametrize(
    "stamp",
    [
        "yesterday",  # not ISO 8601 at all
        "2026-07-01T25:00",  # shaped right, but hour 25
        "2026-02-30T00:00",  # no such day
        "",  # empty time cell
    ],
)
def test_unparseable_time(tmp_path, stamp):
    path = write(tmp_path, f"time,T_out\n2026-07-01T00:00,1\n2026-07-01T01:00,2\n{stamp},3\n2026-07-01T03:00,4\n")
    err = refused(path)
    assert_names(err, path, 4, "time")
    assert "ISO 8601" in err.reason


def test_duplicate_time(tmp_path):
    rows = hourly(3)
    path = write(tmp_path, "time,T_out\n" + "".join(f"{t},{k}\n" for k, t in enumerate([*rows, rows[-1]])))
    err = refused(path)
    assert_names(err, path, 5, "time")
    assert "duplicate" in err.reason and "row 4" in err.reason


def test_row_with_more_fields_than_the_header(tmp_path):
    """A stray delimiter shifts a row's values under the wrong columns: refused."""
    rows = hourly(3)
    text = "time,T_out\n" + f"{rows[0]},1.0\n{rows[1]},4.08,99\n{rows[2]},2.0\n"
    path = write(tmp_path, text)
    err = refused(path)
    assert err.key == "row 3" and "3 fields" in err.reason and "2 columns" in err.reason


def test_trailing_empty_cells_are_accepted(tmp_path):
    """Spreadsheet exports often end rows with empty cells: harmless."""
    rows = hourly(3)
    path = write(tmp_path, "time,T_out\n" + "".join(f"{t},{k},,\n" for k, t in enumerate(rows)))
    series = read_series(path, [T_OUT])
    np.testing.assert_array_equal(series.values["t_air"], [0.0, 1.0, 2.0])


def test_unsorted_time(tmp_path):
    rows = hourly(4)
    rows[1], rows[2] = rows[2], rows[1]
    path = write(tmp_path, "time,T_out\n" + "".join(f"{t},{k}\n" for k, t in enumerate(rows)))
    err = refused(path)
    assert_names(err, path, 4, "time")
    assert "time order" in err.reason


@pytest.mark.parametrize("cell", ["", "NaN", "NA", "nan"])
def test_missing_value_refused_without_fill_gaps(tmp_path, cell):
    rows = hourly(5)
    cells = ["1", "2", cell, "4", "5"]
    path = write(tmp_path, "time,T_out\n" + "".join(f"{t},{c}\n" for t, c in zip(rows, cells)))
    err = refused(path)
    assert_names(err, path, 4, "T_out")
    assert "NaN" in err.reason and "fill_gaps" in err.reason


def test_text_in_a_number_column(tmp_path):
    rows = hourly(3)
    path = write(tmp_path, "time,T_out\n" + "".join(f"{t},{c}\n" for t, c in zip(rows, ["1", "warm", "3"])))
    err = refused(path)
    assert_names(err, path, 3, "T_out")
    assert "'warm'" in err.reason


def test_gap_longer_than_default_max_interval(tmp_path):
    # hourly rows, then a 4 h jump: longer than 3 x the median interval (3 h)
    rows = hourly(10)
    del rows[5:8]
    path = write(tmp_path, "time,T_out\n" + "".join(f"{t},20\n" for t in rows))
    err = refused(path)
    assert_names(err, path, 7, "time")
    assert "4 h" in err.reason and "row 6" in err.reason and "median" in err.reason


def test_gap_longer_than_max_interval(tmp_path):
    rows = hourly(6)
    del rows[3]  # a 2 h step between rows 4 and 5 of the file
    path = write(tmp_path, "time,T_out\n" + "".join(f"{t},20\n" for t in rows))
    read_series(path, [T_OUT])  # the default limit (3 h) lets it pass
    err = refused(path, max_interval=3600.0)
    assert_names(err, path, 5, "time")
    assert "max_interval 1 h" in err.reason


def test_gap_longer_than_fill_gaps_is_still_refused(tmp_path):
    rows = hourly(10)
    del rows[5:8]
    path = write(tmp_path, "time,T_out\n" + "".join(f"{t},20\n" for t in rows))
    err = refused(path, fill_gaps=3 * 3600.0)
    assert_names(err, path, 7, "time")
    assert "fill_gaps 3 h" in err.reason


@pytest.mark.parametrize(
    ("spec", "value", "shown"),
    [
        (T_OUT, "-300", "-300 degC"),  # below absolute zero
        (ColumnSpec("t_air", "T_out", "K", "temperature"), "-1", "-1 K"),  # below 0 K
        (T_OUT, "2500", "2500 degC"),  # above the 2000 degC ceiling
        (ColumnSpec("solar", "T_out", "W/m2", "irradiance"), "-5", "-5 W/m2"),
        (ColumnSpec("solar", "T_out", "W/m2", "irradiance"), "1600", "1600 W/m2"),
        (ColumnSpec("rh", "T_out", "%", "fraction"), "105", "105 % = 1.05 1"),
        (ColumnSpec("rh", "T_out", "1", "fraction"), "-0.1", "-0.1 1"),
        (ColumnSpec("wind", "T_out", "m/s", "speed"), "-1", "-1 m/s"),
        (ColumnSpec("wind", "T_out", "km/h", "speed"), "400", "400 km/h = 111.111 m/s"),
    ],
)
def test_out_of_range_values(tmp_path, spec, value, shown):
    rows = hourly(4)
    cells = ["0", "0", value, "0"]
    path = write(tmp_path, "time,T_out\n" + "".join(f"{t},{c}\n" for t, c in zip(rows, cells)))
    err = refused(path, columns=[spec])
    assert_names(err, path, 4, "T_out")
    assert shown in err.reason and "plausible range" in err.reason


def test_infinite_value(tmp_path):
    rows = hourly(3)
    path = write(tmp_path, "time,v\n" + "".join(f"{t},{c}\n" for t, c in zip(rows, ["1", "inf", "3"])))
    err = refused(path, columns=[ColumnSpec("flux", "v", "W/m2", "heat_flux")])
    assert_names(err, path, 3, "v")
    assert "finite" in err.reason


@pytest.mark.parametrize("unit", ["W/m2", "furlong/fortnight", "W m-2", "no such unit"])
def test_unit_that_does_not_fit(tmp_path, unit):
    path = write(tmp_path, "time,T_out\n2026-07-01T00:00,1\n2026-07-01T01:00,2\n")
    err = refused(path, columns=[ColumnSpec("t_air", "T_out", unit, "temperature")], case_file="case.toml")
    # the unit is written in the case file: the message names that key, and the column and data file
    assert err.file == "case.toml" and err.key == "series.columns.t_air.unit"
    assert "'T_out'" in err.reason and str(path) in err.reason and repr(unit) in err.reason


def test_missing_value_at_the_edge_is_never_filled(tmp_path):
    rows = hourly(4)
    path = write(tmp_path, "time,T_out\n" + "".join(f"{t},{c}\n" for t, c in zip(rows, ["1", "2", "3", ""])))
    err = refused(path, fill_gaps=86400.0)
    assert_names(err, path, 5, "T_out")
    assert "end of the series" in err.reason


def test_nonexistent_local_time_is_refused(tmp_path):
    # Europe/Berlin went from 02:00 CET to 03:00 CEST on 2026-03-29: 02:30 never happened
    stamps = ["2026-03-29T01:30", "2026-03-29T02:30", "2026-03-29T03:30"]
    path = write(tmp_path, "time,T_out\n" + "".join(f"{t},5\n" for t in stamps))
    err = refused(path, timezone="Europe/Berlin")
    assert_names(err, path, 3, "time")
    assert "does not exist" in err.reason and "Europe/Berlin" in err.reason


def test_unknown_timezone(tmp_path):
    path = write(tmp_path, "time,T_out\n2026-07-01T00:00,1\n2026-07-01T01:00,2\n")
    err = refused(path, timezone="Mars/Olympus", case_file="case.toml")
    assert err.file == "case.toml" and err.key == "series.timezone"


def test_one_row_is_not_a_series(tmp_path):
    path = write(tmp_path, "time,T_out\n2026-07-01T00:00,1\n")
    err = refused(path)
    assert_names(err, path, 2, "time")


# ---------------------------------------------------------------------------
# good CSV files


def test_offsets_convert_to_utc(tmp_path):
    text = (
        "time,T_out,I_south\n"
        "2026-07-01T00:00Z,10,0\n"
        "2026-07-01T02:00+01:00,11,100\n"  # 01:00Z
        "2026-07-01T02:00:00+0000,12,200\n"  # 02:00Z
        "2026-06-30T22:00-05:00,13,300\n"  # 03:00Z
        "2026-07-01 04:00Z,14,400\n"  # a space for the T (a naive stamp among these is refused: test_first_hour)
    )
    path = write(tmp_path, text)
    s = read_series(path, [T_OUT, SOLAR], timezone="UTC")
    assert s.time.dtype == np.dtype("datetime64[s]")
    np.testing.assert_array_equal(s.time, utc("2026-07-01T00:00") + np.arange(5) * np.timedelta64(1, "h"))
    np.testing.assert_array_equal(s.values["t_air"], [10, 11, 12, 13, 14])
    np.testing.assert_array_equal(s.values["solar"], [0, 100, 200, 300, 400])
    assert s.kinds == {"t_air": "temperature", "solar": "irradiance"}
    assert s.filled == {"t_air": 0, "solar": 0}


def test_offsets_win_over_timezone(tmp_path):
    path = write(tmp_path, "time,T_out\n2026-07-01T00:00Z,1\n2026-07-01T03:00+02:00,2\n")
    s = read_series(path, [T_OUT], timezone="Europe/Berlin")
    np.testing.assert_array_equal(s.time, [utc("2026-07-01T00:00"), utc("2026-07-01T01:00")])


@pytest.mark.parametrize(
    ("timezone", "first_utc"),
    [
        ("Europe/Berlin", "2026-06-30T22:00"),  # CEST, UTC+2 in July
        ("+01:00", "2026-06-30T23:00"),
        ("-05:30", "2026-07-01T05:30"),
        ("UTC", "2026-07-01T00:00"),
    ],
)
def test_naive_times_in_a_timezone(tmp_path, timezone, first_utc):
    rows = hourly(3)
    path = write(tmp_path, "time,T_out\n" + "".join(f"{t},20\n" for t in rows))
    s = read_series(path, [T_OUT], timezone=timezone)
    np.testing.assert_array_equal(s.time, utc(first_utc) + np.arange(3) * np.timedelta64(1, "h"))


def test_naive_times_across_both_clock_changes(tmp_path):
    # Europe/Berlin: UTC+1 in winter, UTC+2 from 2026-03-29 01:00Z to 2026-10-25 01:00Z
    stamps = ["2026-01-15T12:00", "2026-03-29T01:30", "2026-03-29T03:30", "2026-07-01T12:00", "2026-12-01T12:00"]
    expected = ["2026-01-15T11:00", "2026-03-29T00:30", "2026-03-29T01:30", "2026-07-01T10:00", "2026-12-01T11:00"]
    path = write(tmp_path, "time,T_out\n" + "".join(f"{t},5\n" for t in stamps))
    s = read_series(path, [T_OUT], timezone="Europe/Berlin", max_interval=400 * 86400.0)
    np.testing.assert_array_equal(s.time, [utc(e) for e in expected])


def test_repeated_local_hour_is_resolved_by_file_order(tmp_path):
    # On 2026-10-25 Berlin clocks went back from 03:00 CEST to 02:00 CET: a logger on
    # local time writes 02:00 and 02:30 twice. First pass CEST (UTC+2), second CET (UTC+1).
    stamps = ["01:30", "02:00", "02:30", "02:00", "02:30", "03:00"]
    path = write(tmp_path, "time,T_out\n" + "".join(f"2026-10-25T{t},5\n" for t in stamps))
    s = read_series(path, [T_OUT], timezone="Europe/Berlin")
    expected = utc("2026-10-24T23:30") + np.arange(6) * np.timedelta64(30, "m")
    np.testing.assert_array_equal(s.time, expected)


def test_variable_steps(tmp_path):
    """Steps that vary on purpose are read as written, and no row is called missing
    (only a regular file, one interval making up 80 % of them, has missing rows)."""
    import warnings

    stamps = ["00:00", "00:10", "00:30", "01:30", "02:40", "03:00"]
    values = [0.0, 1.0, 3.0, 9.0, 16.0, 18.0]
    path = write(tmp_path, "time,T_out\n" + "".join(f"2026-07-01T{t},{v}\n" for t, v in zip(stamps, values)))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        s = read_series(path, [T_OUT], max_interval=2 * 3600.0)
    np.testing.assert_array_equal(s.seconds_since(utc("2026-07-01T00:00")), [0, 600, 1800, 5400, 9600, 10800])
    np.testing.assert_array_equal(s.values["t_air"], values)
    assert s.filled == {"t_air": 0}


def test_units_convert_to_si(tmp_path):
    text = "time,T_out,RH,v\n2026-07-01T00:00,68,55,36\n2026-07-01T01:00,50,100,0\n"
    path = write(tmp_path, text)
    specs = [
        ColumnSpec("t_air", "T_out", "degF", "temperature"),
        ColumnSpec("rh", "RH", "%", "fraction"),
        ColumnSpec("wind", "v", "km/h", "speed"),
    ]
    s = read_series(path, specs)
    # 68 degF = 20 degC and 50 degF = 10 degC exactly; 36 km/h = 10 m/s
    np.testing.assert_allclose(s.values["t_air"], [20.0, 10.0], rtol=0, atol=1e-12)
    np.testing.assert_allclose(s.values["rh"], [0.55, 1.0], rtol=0, atol=1e-15)
    np.testing.assert_allclose(s.values["wind"], [10.0, 0.0], rtol=0, atol=1e-12)
    assert s.units == {"t_air": "degF", "rh": "%", "wind": "km/h"}


def test_semicolon_decimal_comma_comments_and_blank_lines(tmp_path):
    text = (
        "# station: rooftop, logger 7\n"
        "# exported 2026-07-02\n"
        "time;T_out;I_south\n"
        "2026-07-01T00:00;12,5;0\n"
        "2026-07-01T01:00;13,0;12,5\n"
        "\n"
        "2026-07-01T02:00;oops;40\n"
        ";;\n"
    )
    path = write(tmp_path, text)
    err = refused(path, columns=[T_OUT, SOLAR])
    # row numbers count every line, as a spreadsheet shows them
    assert_names(err, path, 7, "T_out")
    path = write(tmp_path, text.replace("oops", "13,5"))
    s = read_series(path, [T_OUT, SOLAR])
    np.testing.assert_array_equal(s.values["t_air"], [12.5, 13.0, 13.5])
    np.testing.assert_array_equal(s.values["solar"], [0.0, 12.5, 40.0])


def test_sha256_is_of_the_file_bytes(tmp_path):
    path = write(tmp_path, HEADER + "2026-07-01T00:00,1,0\n2026-07-01T01:00,2,0\n")
    s = read_series(path, [T_OUT])
    assert s.sha256 == hashlib.sha256(path.read_bytes()).hexdigest()
    assert s.file == str(path)


def test_a_year_at_ten_minute_steps_reads_completely(tmp_path):
    """A year at 10-minute steps reads whole (its speed is measured in benchmarks/, not here)."""
    t = np.arange(utc("2026-01-01T00:00"), utc("2027-01-01T00:00"), np.timedelta64(10, "m"))
    phase = np.arange(t.size) * (2 * np.pi / 144)
    body = "\n".join(
        f"{a},{10 + 8 * np.sin(p):.2f},{max(0.0, 600 * np.sin(p)):.1f},55"
        for a, p in zip(t.astype(str), phase)
    )
    path = write(tmp_path, "time,T_out,I_south,RH\n" + body + "\n")
    s = read_series(path, [T_OUT, SOLAR, RH])
    assert s.time.size == 52560
    assert s.values["t_air"][36] == pytest.approx(10 + 8 * np.sin(36 * 2 * np.pi / 144), abs=0.005)


# ---------------------------------------------------------------------------
# filling


def test_fill_gaps_fills_a_short_nan_run_linearly(tmp_path):
    rows = hourly(6)
    cells = ["10", "12", "", "NaN", "18", "20"]  # a straight line with two values missing
    path = write(tmp_path, "time,T_out\n" + "".join(f"{t},{c}\n" for t, c in zip(rows, cells)))
    # the run spans 3 h between the valid values on either side (rows 3 and 6)
    s = read_series(path, [T_OUT], fill_gaps=3 * 3600.0)
    np.testing.assert_allclose(s.values["t_air"], [10, 12, 14, 16, 18, 20], rtol=0, atol=1e-12)
    assert s.filled == {"t_air": 2}


def test_fill_gaps_refuses_a_longer_nan_run(tmp_path):
    rows = hourly(7)
    cells = ["10", "12", "", "", "", "20", "22"]  # 4 h between the valid values
    path = write(tmp_path, "time,T_out\n" + "".join(f"{t},{c}\n" for t, c in zip(rows, cells)))
    err = refused(path, fill_gaps=3 * 3600.0)
    assert_names(err, path, 4, "T_out")
    assert "3 in a row" in err.reason and "4 h" in err.reason and "fill_gaps 3 h" in err.reason


def test_fill_gaps_fills_missing_rows(tmp_path):
    rows = hourly(10)
    del rows[5:8]  # 05:00 to 08:00 missing: a 4 h gap
    values = [2.0 * k for k in range(10)]
    del values[5:8]
    path = write(tmp_path, "time,T_out\n" + "".join(f"{t},{v}\n" for t, v in zip(rows, values)))
    s = read_series(path, [T_OUT], fill_gaps=4 * 3600.0)
    np.testing.assert_array_equal(s.time, utc("2026-07-01T00:00") + np.arange(10) * np.timedelta64(1, "h"))
    np.testing.assert_allclose(s.values["t_air"], 2.0 * np.arange(10), rtol=0, atol=1e-12)
    assert s.filled == {"t_air": 3}


# ---------------------------------------------------------------------------
# netCDF


def _weather_dataset(n: int = 24):
    import xarray as xr

    t = utc("2026-07-01T00:00") + np.arange(n) * np.timedelta64(1, "h")
    ds = xr.Dataset(
        {
            "T_out": ("time", 20.0 + 0.5 * np.arange(n), {"units": "degC"}),
            "I_south": ("time", np.linspace(0.0, 800.0, n), {"units": "W m-2"}),
        },
        coords={"time": ("time", t.astype("datetime64[ns]"))},
    )
    ds["time"].encoding.update(units="hours since 2026-01-01 00:00:00", calendar="standard")
    return ds


def test_netcdf_round_trip(tmp_path):
    ds = _weather_dataset()
    path = tmp_path / "weather.nc"
    ds.to_netcdf(path)
    s = read_series(path, [T_OUT, SOLAR])
    np.testing.assert_array_equal(s.time, ds["time"].values.astype("datetime64[s]"))
    np.testing.assert_array_equal(s.values["t_air"], ds["T_out"].values)
    np.testing.assert_array_equal(s.values["solar"], ds["I_south"].values)
    assert s.sha256 == hashlib.sha256(path.read_bytes()).hexdigest()


def test_netcdf_nan_names_variable_and_index(tmp_path):
    ds = _weather_dataset()
    ds["T_out"][3] = np.nan
    path = tmp_path / "weather.nc"
    ds.to_netcdf(path)
    err = refused(path)
    assert str(path) in str(err) and err.key == "time[3], variable T_out"
    s = read_series(path, [T_OUT], fill_gaps=7200.0)
    assert s.filled == {"t_air": 1} and s.values["t_air"][3] == pytest.approx(21.5, abs=1e-12)


def test_netcdf_missing_variable_lists_variables(tmp_path):
    path = tmp_path / "weather.nc"
    _weather_dataset().to_netcdf(path)
    err = refused(path, columns=[ColumnSpec("t_air", "T_air", "degC", "temperature")])
    assert str(path) in str(err) and "T_air" in err.key and "'T_out'" in err.reason


def test_netcdf_declared_units_must_agree(tmp_path):
    path = tmp_path / "weather.nc"
    _weather_dataset().to_netcdf(path)
    err = refused(path, columns=[ColumnSpec("t_air", "T_out", "K", "temperature")], case_file="case.toml")
    assert err.file == "case.toml" and "'degC'" in err.reason and "T_out" in err.reason


def test_netcdf_refuses_a_local_timezone(tmp_path):
    path = tmp_path / "weather.nc"
    _weather_dataset().to_netcdf(path)
    err = refused(path, timezone="Europe/Berlin", case_file="case.toml")
    assert err.key == "series.timezone" and "UTC" in err.reason


# ---------------------------------------------------------------------------
# Forcing and daily_cycle


def _linear_series(tmp_path) -> Series:
    # irregular steps, values on the straight line 5 + 0.001 * seconds
    offsets = [0, 600, 1800, 5400, 9000]
    rows = [str(utc("2026-07-01T00:00") + np.timedelta64(s, "s")) for s in offsets]
    path = write(tmp_path, "time,T_out\n" + "".join(f"{t},{5 + 0.001 * s!r}\n" for t, s in zip(rows, offsets)))
    return read_series(path, [T_OUT], max_interval=3600.0)


def test_forcing_interpolation_is_exact_for_a_linear_series(tmp_path):
    series = _linear_series(tmp_path)
    forcing = Forcing.from_series(series, "t_air", case_file="case.toml", key="outside.air_temperature")
    seconds = np.array([0, 1, 599, 1234, 4000, 8999, 9000])
    times = utc("2026-07-01T00:00") + seconds.astype("timedelta64[s]")
    # linear interpolation reproduces a linear function; only round-off remains
    np.testing.assert_allclose(forcing(times), 5 + 0.001 * seconds, rtol=1e-14, atol=1e-13)
    # sub-second times work too (the solver may use datetime64[ms])
    half = np.array([utc("2026-07-01T00:00")]).astype("datetime64[ms]") + np.timedelta64(500, "ms")
    np.testing.assert_allclose(forcing(half), [5.0005], rtol=1e-14)
    assert forcing.span() == (utc("2026-07-01T00:00"), utc("2026-07-01T02:30"))


def test_forcing_refuses_times_outside_the_series(tmp_path):
    series = _linear_series(tmp_path)
    forcing = Forcing.from_series(series, "t_air", case_file="case.toml", key="outside.air_temperature")
    run = utc("2026-07-01T00:00") + np.arange(0, 4) * np.timedelta64(1, "h")  # to 03:00, series ends 02:30
    with pytest.raises(SeriesError) as info:
        forcing(run)
    err = info.value
    assert err.file == "case.toml" and err.key == "outside.air_temperature"
    assert series.file in err.reason
    assert "2026-07-01T00:00Z to 2026-07-01T03:00Z" in err.reason  # the run
    assert "2026-07-01T00:00Z to 2026-07-01T02:30Z" in err.reason  # the series


def test_forcing_unknown_name(tmp_path):
    series = _linear_series(tmp_path)
    with pytest.raises(SeriesError, match="t_air"):
        Forcing.from_series(series, "solar", case_file="case.toml", key="outside.solar_irradiance")


def test_constant_forcing():
    f = Forcing.constant(20.0)
    times = utc("2026-07-01T00:00") + np.arange(3) * np.timedelta64(1, "h")
    np.testing.assert_array_equal(f(times), [20.0, 20.0, 20.0])
    assert f.span() is None


def test_daily_cycle_peaks_at_peak_hour():
    cycle = daily_cycle(24.0, 7.0, 15)
    day = utc("2026-07-01T00:00") + np.arange(0, 86400, 60).astype("timedelta64[s]")
    values = cycle(day)
    assert day[np.argmax(values)] == utc("2026-07-01T15:00")
    assert values.max() == 24.0 + 7.0  # cos(0) = 1 exactly
    assert values.min() == pytest.approx(24.0 - 7.0, abs=1e-12)  # at 03:00
    assert cycle(np.array([utc("2026-07-01T03:00")]))[0] == pytest.approx(17.0, abs=1e-12)


def test_daily_cycle_mean_over_a_day_is_the_mean():
    # The mean of cos over a whole period is 0, and N equally spaced samples of
    # a single harmonic average to exactly 0 too, so only round-off remains.
    cycle = Forcing.from_cycle(daily_cycle(24.0, 7.0, 15.5))
    day = utc("2026-07-01T00:00") + np.arange(0, 86400, 600).astype("timedelta64[s]")
    assert cycle(day).mean() == pytest.approx(24.0, abs=1e-12)
    assert cycle.span() is None


def test_daily_cycle_with_period_and_clock():
    # a 12 h period peaks at 06:00 and 18:00; with the clock at UTC+2, 15:00 local is 13:00Z
    half_day = daily_cycle(0.0, 1.0, 6, period=12 * 3600.0)
    assert half_day(np.array([utc("2026-07-01T18:00")]))[0] == 1.0
    local = daily_cycle(24.0, 7.0, 15, timezone="+02:00")
    assert local(np.array([utc("2026-07-01T13:00")]))[0] == 31.0
    # an IANA zone is used at its standard offset (CET, UTC+1) all year: no jump in summer
    berlin = daily_cycle(24.0, 7.0, 15, timezone="Europe/Berlin")
    assert berlin(np.array([utc("2026-07-01T14:00")]))[0] == 31.0


@pytest.mark.parametrize(
    "start,words",
    [
        ("1500-01-01T00:00", "outside the years 1800 to 2200"),  # was archived as 2084 (ns time stamps wrap)
        ("2250-06-01T00:00", "outside the years 1800 to 2200"),
        ("2026-01-01T00:00+99:99", "cannot read"),
    ],
)
def test_case_times_outside_the_time_axis_are_refused(tmp_path, start, words):
    """A start the time axis cannot hold, or an impossible offset, is a clear refusal (exit 2)."""
    from layers.cli import main

    case = tmp_path / "c.toml"
    case.write_text(
        '[[layers]]\nmaterial = "brick"\nthickness = "200 mm"\n[inside]\ntype = "temperature"\n'
        'surface_temperature = "20 degC"\n[outside]\ntype = "temperature"\nsurface_temperature = "0 degC"\n'
        f'[time]\nstart = "{start}"\nduration = "1 h"\nstep = "1 h"\n'
    )
    assert main(["check", str(case)]) == 2


def test_epoch_seconds_in_a_time_column_get_a_hint(tmp_path):
    """Unix time in a CSV time column (was read as a year) is refused with a hint."""
    path = write(tmp_path, "time,T_out\n1767225600,5\n1767229200,6\n")
    err = refused(path)
    assert "seconds since 1970" in str(err)


def test_out_of_range_offsets_and_non_zone_names_are_refused(tmp_path):
    """An ISO offset of +99:99 in a row, and 'localtime' as a zone, are refused."""
    path = write(tmp_path, "time,T_out\n2026-01-01T00:00+99:99,5\n2026-01-01T01:00+99:99,6\n")
    assert "out of range" in str(refused(path))
    good = write(tmp_path, "time,T_out\n2026-01-01T00:00,5\n2026-01-01T01:00,6\n", name="good.csv")
    assert "unknown time zone" in str(refused(good, timezone="localtime"))
    for ok in ("UTC", "+01:00", "Europe/Berlin"):
        read_series(good, [T_OUT], timezone=ok)


def test_series_years_outside_the_axis_are_refused(tmp_path):
    path = write(tmp_path, "time,T_out\n1500-01-01T00:00,5\n1500-01-01T01:00,6\n")
    assert "outside the years" in str(refused(path))


def test_a_utf16_csv_gets_a_hint_to_save_as_utf8(tmp_path):
    """A spreadsheet's 'Unicode text' export (UTF-16 with a byte-order mark) is refused
    with a hint instead of a header full of NUL characters."""
    path = tmp_path / "wide.csv"
    path.write_bytes("time,T_out\n2026-07-01T00:00,5\n2026-07-01T01:00,6\n".encode("utf-16"))
    err = refused(path)
    assert "UTF-8" in str(err) and "\\x00" not in str(err)
