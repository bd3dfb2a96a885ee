"""Benchmark: ``layers list`` over an archive of 1,000 runs must answer within 2 s.

Run as ``python benchmarks/bench_list.py [--runs 1000]``.  It runs one tiny
real case, copies the file 1,000 times into a temporary folder and edits each
copy's attributes (title, creation time in shuffled order, case hash, and the
headline attributes of :func:`layers.catalogue.headline_attributes`), then times

* :func:`layers.catalogue.list_runs` with its header cache warm (every later
  listing of an archive: the 2 s target),
* the same cold (``cache=False``: every header read, as on the first listing),
  on runs with the headline attributes and on runs without them (the fallback
  that reads two small series),
* the whole command ``python -m layers.cli list DIR --json`` in a fresh
  interpreter, cache warm (start-up and imports included: what a user waits for),

against baselines measured in the same run on the same files: ``os.stat`` of
every file, and opening and closing every file with netCDF4 (the least any
header reader must do: the netCDF library reads every variable's metadata on
open).  Times vary with the machine and its disk cache; the ratios against
the baselines are what to compare between versions.

Exit status 1 if the warm listing or the warm command takes 2 s or more.
"""

from __future__ import annotations

import argparse
import datetime as dt
import os
import random
import shutil
import subprocess
import sys
import tempfile
import textwrap
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

import netCDF4  # noqa: E402

from layers.catalogue import headline_attributes, list_runs  # noqa: E402
from layers.case import load_case  # noqa: E402
from layers.results import archive  # noqa: E402
from layers.simulation import simulate  # noqa: E402

LIMIT_S = 2.0

CASE = """
title = "benchmark wall"
[[layers]]
material = "brick"
thickness = "40 mm"
[[layers]]
material = "mineral-wool"
thickness = "30 mm"
[inside]
type = "film"
air_temperature = "20 degC"
surface_resistance = "0.13 m2*K/W"
[outside]
type = "film"
air_temperature = "0 degC"
surface_resistance = "0.04 m2*K/W"
[time]
start = "2026-01-01T00:00"
duration = "1 d"
step = "1 h"
initial = "steady"
[mesh]
max_cell = "10 mm"
"""


def make_archive(folder: Path, runs: int, with_headlines: bool) -> None:
    """``runs`` copies of one real run, each with its own attributes."""
    case_file = folder / "bench.toml"
    case_file.write_text(textwrap.dedent(CASE), encoding="utf-8")
    ds = simulate(load_case(case_file))
    headlines = headline_attributes(ds)
    original = archive(ds, "bench", folder / "original")
    order = list(range(runs))
    random.Random(1).shuffle(order)
    base = dt.datetime(2026, 1, 1, tzinfo=dt.timezone.utc)
    target = folder / ("with" if with_headlines else "without")
    target.mkdir()
    for i, k in enumerate(order):
        path = target / f"bench-{i:04d}.nc"
        shutil.copyfile(original, path)
        with netCDF4.Dataset(path, "a") as nc:
            nc.setncattr("title", f"benchmark wall {i}")
            nc.setncattr("created", (base + dt.timedelta(minutes=k)).strftime("%Y-%m-%dT%H:%M:%SZ"))
            nc.setncattr("case_sha256", f"{i:064x}")
            if with_headlines:
                for name, value in headlines.items():
                    nc.setncattr(name, value + i * 0.01 if isinstance(value, float) else value)
            else:  # a run written before the headline attributes existed
                for name in headlines:
                    nc.delncattr(name)


def best_of(fn, repeat: int = 3) -> float:
    """The shortest of ``repeat`` timings [s] (the least disturbed by other load)."""
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=1000)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory(prefix="layers-bench-") as tmp:
        folder = Path(tmp)
        os.environ["LAYERS_CACHE_DIR"] = str(folder / "cache")  # never the user's cache
        make_archive(folder, args.runs, with_headlines=True)
        make_archive(folder, args.runs, with_headlines=False)
        with_h, without_h = folder / "with", folder / "without"
        files = sorted(with_h.glob("*.nc"))

        def stat_all() -> None:
            for p in files:
                os.stat(p)

        def open_all() -> None:
            for p in files:
                netCDF4.Dataset(p, "r").close()

        entries = list_runs(with_h, cache=False)
        assert len(entries) == args.runs and all(e.is_run and e.headline_source == "attributes" for e in entries)
        assert [e.created for e in entries] == sorted(e.created for e in entries)
        fallback = list_runs(without_h, cache=False)
        assert all(e.is_run and e.headline_source == "variables" for e in fallback)

        t_stat = best_of(stat_all)
        t_open = best_of(open_all, repeat=1)
        t_cold = best_of(lambda: list_runs(with_h, cache=False), repeat=1)
        t_fallback = best_of(lambda: list_runs(without_h, cache=False), repeat=1)
        assert list_runs(with_h) == entries  # primes the cache; cached entries equal read ones
        t_warm = best_of(lambda: list_runs(with_h))
        command = [sys.executable, "-m", "layers.cli", "list", str(with_h), "--json"]
        t_python = best_of(lambda: subprocess.run([sys.executable, "-c", "pass"], check=True))
        t_cli = best_of(lambda: subprocess.run(command, check=True, cwd=ROOT, stdout=subprocess.DEVNULL))

    n = args.runs
    print(f"layers list, {n} runs (cache warm: best of 3; cold and open+close: one pass each)")
    print(f"  baseline os.stat of every file            {t_stat:8.3f} s")
    print(f"  baseline netCDF4 open+close of every file {t_open:8.3f} s")
    print(f"  list_runs, cache warm                     {t_warm:8.3f} s   {t_warm / t_stat:5.1f} x stat   (limit {LIMIT_S:g} s)")
    print(f"  list_runs, cold, headline attributes      {t_cold:8.3f} s   {t_cold / t_open:5.2f} x open+close")
    print(f"  list_runs, cold, fallback (2 series)      {t_fallback:8.3f} s   {t_fallback / t_open:5.2f} x open+close")
    print(f"  baseline python -c pass                   {t_python:8.3f} s")
    print(f"  python -m layers.cli list DIR --json, warm {t_cli:7.3f} s   (limit {LIMIT_S:g} s)")
    ok = t_warm < LIMIT_S and t_cli < LIMIT_S
    print("PASS" if ok else f"FAIL: layers list must answer within {LIMIT_S:g} s for {n} runs")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
