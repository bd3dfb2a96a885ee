"""Provenance: what a run records, and re-running an archived run."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

from layers.cli import main
from layers.errors import CaseError

CASE = """
title = "provenance"
[[layers]]
material = "brick"
thickness = "240 mm"
[series]
file = "data/weather.csv"
embed_series = {embed}
[series.columns]
t_out = {{column = "T_out", unit = "degC"}}
[inside]
type = "film"
air_temperature = "20 degC"
[outside]
type = "film"
air_temperature = "series:t_out"
[time]
step = "30 min"
"""


def _setup(tmp_path, embed: bool):
    (tmp_path / "data").mkdir()
    rows = [f"2026-02-01T{h:02d}:00,{5 + 3 * np.sin(h / 4):.2f}" for h in range(24)]
    (tmp_path / "data" / "weather.csv").write_text("time,T_out\n" + "\n".join(rows) + "\n")
    case = tmp_path / "wall.toml"
    case.write_text(CASE.format(embed=str(embed).lower()))
    return case


def test_run_records_provenance_and_reruns_from_embedded_series(tmp_path, capsys):
    case = _setup(tmp_path, embed=True)
    runs = tmp_path / "runs"
    assert main(["run", str(case), "--archive", str(runs), "--label", "first", "--quiet"]) == 0
    (first,) = list(runs.glob("*.nc"))
    with xr.open_dataset(first) as ds:
        a = ds.load()
    assert a.attrs["label"] == "first" and "layers run" in a.attrs["command"]
    assert len(a.attrs["series_sha256"]) == 64 and "series_embedded" in a.attrs
    # the original files are gone; the archived run alone reproduces the result
    (tmp_path / "data" / "weather.csv").unlink()
    case.unlink()
    assert main(["run", "--again", str(first), "--archive", str(runs), "--quiet"]) == 0
    second = [p for p in runs.glob("*.nc") if p != first]
    assert len(second) == 1
    with xr.open_dataset(second[0]) as b:
        np.testing.assert_array_equal(b["temperature"].values, a["temperature"].values)
        assert b.attrs["case_sha256"] == a.attrs["case_sha256"]
        assert b.attrs["label"] == "first"
        # the re-run says where it came from (by name and hash), not the private folder it ran in
        assert b.attrs["rerun_of"] == first.name and len(b.attrs["rerun_of_sha256"]) == 64
        # no user folder is recorded unless asked
        for name in ("case_path", "series_path"):
            assert name not in a.attrs and name not in b.attrs
        assert "embedded" in b.attrs["series_source"] and "--again" in b.attrs["history"]


def test_again_without_embedded_series_needs_unchanged_file(tmp_path, capsys):
    case = _setup(tmp_path, embed=False)
    runs = tmp_path / "runs"
    assert main(["run", str(case), "--archive", str(runs), "--quiet"]) == 0
    (first,) = list(runs.glob("*.nc"))
    data = str(tmp_path / "data")
    assert main(["run", "--again", str(first), "--series-dir", data, "--archive", str(runs), "--quiet"]) == 0
    (tmp_path / "data" / "weather.csv").write_text("time,T_out\n2026-02-01T00:00,1\n2026-02-02T00:00,2\n")
    assert main(["run", "--again", str(first), "--series-dir", data, "--archive", str(runs), "--quiet"]) == 2
    assert "changed" in capsys.readouterr().err


def test_again_finds_the_series_from_any_folder_when_paths_are_recorded(tmp_path, monkeypatch):
    """With --record-paths a run made with a relative case path records the
    series' absolute path, so --again works from any working folder."""
    case = _setup(tmp_path, embed=False)
    runs = tmp_path / "runs"
    monkeypatch.chdir(tmp_path)
    assert main(["run", case.name, "--archive", str(runs), "--quiet", "--record-paths"]) == 0
    (first,) = list(runs.glob("*.nc"))
    with xr.open_dataset(first) as ds:
        assert Path(ds.attrs["series_path"]).is_absolute()
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    monkeypatch.chdir(elsewhere)
    assert main(["run", "--again", str(first), "--archive", str(runs), "--quiet"]) == 0


def test_again_finds_the_series_beside_the_run_or_in_series_dir(tmp_path, capsys):
    """A run records no folder; its series is found by name beside the run
    file or in a folder given with --series-dir, and checked by its hash."""
    import shutil

    case = _setup(tmp_path, embed=False)
    runs = tmp_path / "runs"
    assert main(["run", str(case), "--archive", str(runs), "--quiet"]) == 0
    (first,) = list(runs.glob("*.nc"))
    stash = tmp_path / "stash"
    stash.mkdir()
    shutil.move(tmp_path / "data" / "weather.csv", stash / "weather.csv")
    assert main(["run", "--again", str(first), "--archive", str(runs), "--quiet"]) == 2
    assert "--series-dir" in capsys.readouterr().err
    assert main(["run", "--again", str(first), "--series-dir", str(stash), "--archive", str(runs), "--quiet"]) == 0
    shutil.copy(stash / "weather.csv", runs / "weather.csv")
    assert main(["run", "--again", str(first), "--archive", str(runs), "--quiet"]) == 0


def test_again_finds_the_series_in_the_project_folder(tmp_path, monkeypatch):
    """The usual layout: runs in runs/, the case and its series in data/, the
    command given from the project folder: the series is found one folder down
    from the current folder, by name, and used because its hash matches; a
    changed copy is refused."""
    case = _setup(tmp_path, embed=False)
    runs = tmp_path / "runs"
    monkeypatch.chdir(tmp_path)
    assert main(["run", str(case), "--archive", str(runs), "--quiet"]) == 0
    (first,) = list(runs.glob("*.nc"))
    assert main(["run", "--again", str(first), "--archive", str(runs), "--quiet"]) == 0
    with open(tmp_path / "data" / "weather.csv", "a") as fh:
        fh.write("2026-02-02T00:00,5.0\n")
    assert main(["run", "--again", str(first), "--archive", str(runs), "--quiet"]) == 2


def _crafted_run(tmp_path, case_file: str, series_file: str, embedded: str | None) -> Path:
    """A run file whose stored names point outside any private folder."""
    import hashlib

    text = CASE.format(embed="true").replace('file = "data/weather.csv"', f'file = "{series_file}"')
    ds = xr.Dataset(attrs={
        "case": text,
        "case_sha256": hashlib.sha256(text.encode()).hexdigest(),
        "case_file": case_file,
        "series_sha256": hashlib.sha256((embedded or "").encode()).hexdigest(),
    })
    if embedded is not None:
        ds.attrs["series_embedded"] = embedded
    path = tmp_path / "shared" / "crafted.nc"
    path.parent.mkdir(exist_ok=True)
    ds.to_netcdf(path)
    return path


def test_crafted_run_file_cannot_steer_where_again_writes(tmp_path, monkeypatch):
    """Security: a run file shared by a colleague names its case by an
    absolute path and its series with '..' parts; --again writes neither
    there (only base names, in a private folder that is removed after
    loading), and the re-run still works from the embedded series."""
    import tempfile

    victim = tmp_path / "victim"
    victim.mkdir()
    rows = [f"2026-02-01T{h:02d}:00,{5 + h % 3}" for h in range(24)]
    series = "time,T_out\n" + "\n".join(rows) + "\n"
    crafted = _crafted_run(tmp_path, str(victim / "planted.toml"), "../../victim/planted.csv", series)
    tmp_root = tmp_path / "tmp"
    tmp_root.mkdir()
    monkeypatch.setattr(tempfile, "tempdir", str(tmp_root))
    runs = tmp_path / "runs"
    assert main(["run", "--again", str(crafted), "--archive", str(runs), "--quiet"]) == 0
    assert list(victim.iterdir()) == []
    assert list(tmp_root.iterdir()) == []  # the private folder is gone
    assert len(list(runs.glob("*.nc"))) == 1


def test_crafted_run_with_a_planted_link_does_not_write_through_it(tmp_path, monkeypatch):
    """Even if the private folder held a link under the stored name, the
    case is created with O_EXCL | O_NOFOLLOW and never written through it."""
    import tempfile

    from layers import provenance

    target = tmp_path / "target.toml"
    target.write_text("untouched")
    made = []

    def mkdtemp_with_link(prefix=""):
        folder = tmp_path / f"private{len(made)}"
        folder.mkdir()
        (folder / "wall.toml").symlink_to(target)
        made.append(folder)
        return str(folder)

    monkeypatch.setattr(tempfile, "mkdtemp", mkdtemp_with_link)
    crafted = _crafted_run(tmp_path, "wall.toml", "w.csv", "time,T_out\n2026-02-01T00:00,1\n")
    with pytest.raises(CaseError, match="private copy"):
        provenance.load_archived_case(crafted)
    assert target.read_text() == "untouched"


def test_private_names_are_plain_base_names():
    """Names read from a run keep only a plain base name."""
    from layers.provenance import private_name

    assert private_name("/etc/passwd", "case.toml") == "passwd"
    assert private_name("..", "case.toml") == "case.toml"
    assert private_name("C:\\Users\\x\\wall.toml", "case.toml") == "wall.toml"
    assert private_name(".bashrc", "case.toml") == "case.toml"
    assert private_name("a b$(rm).toml", "case.toml") == "a_b__rm_.toml"


SHORT = """
title = "already archived"
[[layers]]
material = "brick"
thickness = "240 mm"
[inside]
type = "film"
air_temperature = "20 degC"
[outside]
type = "film"
air_temperature = "0 degC"
[time]
start = "2026-01-01T00:00"
duration = "1 d"
step = "1 h"
initial = "steady"
"""

LONG = """
[[layers]]
material = "brick"
thickness = "240 mm"
cells = 400
[inside]
type = "film"
air_temperature = "20 degC"
[outside]
type = "film"
air_temperature = "series:c"
film_coefficient = "auto"
[series.cycles.c]
mean = "5 degC"
amplitude = "5 K"
[time]
duration = "3650 d"
step = "10 min"
initial = "0 degC"
"""

# Runs the command line with the netCDF write slowed down after the data are
# in the temporary file, so that a test can kill the process mid-write.
SLOW_WRITER = """
import sys, time
import xarray as xr
_write = xr.Dataset.to_netcdf
def slow(self, *args, **kwargs):
    out = _write(self, *args, **kwargs)
    time.sleep(60)
    return out
xr.Dataset.to_netcdf = slow
from layers.cli import main
sys.exit(main(sys.argv[1:]))
"""


def _archive_with_one_run(tmp_path):
    """An archive holding one finished run; returns (folder, its listing, its files)."""
    from layers.catalogue import list_runs

    runs = tmp_path / "runs"
    case = tmp_path / "short.toml"
    case.write_text(SHORT)
    assert main(["run", str(case), "--archive", str(runs), "--quiet"]) == 0
    return runs, list_runs(runs), sorted(runs.iterdir())


def _kill_when(proc: subprocess.Popen, ready, timeout: float = 60.0) -> None:
    deadline = time.monotonic() + timeout
    while not ready():
        assert proc.poll() is None, "the run ended before it could be killed"
        assert time.monotonic() < deadline, "the moment to kill never came"
        time.sleep(0.02)
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait()


def test_killed_run_leaves_nothing_in_the_archive(tmp_path):
    """A run killed with SIGKILL halfway through its time march leaves no file
    in the archive, and the archive lists as before."""
    from layers.catalogue import list_runs

    runs, before, files = _archive_with_one_run(tmp_path)
    case = tmp_path / "long.toml"
    case.write_text(LONG)
    proc = subprocess.Popen(
        [sys.executable, "-m", "layers.cli", "run", str(case), "--archive", str(runs), "--quiet"],
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
    )
    started = time.monotonic()
    _kill_when(proc, lambda: time.monotonic() - started > 3.0)
    assert sorted(runs.iterdir()) == files
    assert list_runs(runs) == before


def test_run_killed_while_writing_leaves_no_file_and_is_cleaned_up(tmp_path):
    """SIGKILL while the result is being written (the temporary file exists
    and holds the data) leaves no file under a run name; the archive lists as
    before; the next run removes the dead writer's temporary file."""
    from layers.catalogue import list_runs

    runs, before, files = _archive_with_one_run(tmp_path)
    case = tmp_path / "second.toml"
    case.write_text(SHORT)
    proc = subprocess.Popen(
        [sys.executable, "-c", SLOW_WRITER, "run", str(case), "--archive", str(runs), "--quiet"],
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
    )

    def partial_written() -> bool:
        return any(p.stat().st_size > 0 for p in runs.glob(".*.partial"))

    _kill_when(proc, partial_written)
    assert [p for p in sorted(runs.iterdir()) if not p.name.endswith(".partial")] == files
    assert list_runs(runs) == before
    # a young partial is left alone (its writer might be slow, not dead) ...
    assert main(["run", str(case), "--archive", str(runs), "--quiet"]) == 0
    (left,) = runs.glob(".*.partial")
    # ... and once it is old, the next run of this host removes it
    old = time.time() - 3600
    os.utime(left, (old, old))
    assert main(["run", str(case), "--archive", str(runs), "--quiet"]) == 0
    assert not list(runs.glob(".*.partial"))
    assert len(list_runs(runs)) == len(before) + 2


def test_partial_files_of_other_hosts_are_never_removed(tmp_path):
    """On an archive shared by several hosts, a partial file named for another
    host is kept however old it is and whatever its process number (that
    process may be writing on the other host); one of this host whose writer
    is gone and which is old is removed."""
    from layers.results import _host

    runs, _, _ = _archive_with_one_run(tmp_path)
    dead = 2**22 + 12345  # above the usual pid_max: no such process here
    other = runs / f".wall.another-host-{dead}.abcd.partial"
    mine = runs / f".wall.{_host()}-{dead}.efgh.partial"
    for path in (other, mine):
        path.write_bytes(b"half a file")
        os.utime(path, (time.time() - 86400, time.time() - 86400))
    case = tmp_path / "again.toml"
    case.write_text(SHORT)
    assert main(["run", str(case), "--archive", str(runs), "--quiet"]) == 0
    assert other.exists() and not mine.exists()
