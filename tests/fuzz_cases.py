"""Mutated case files for the fuzz tests, and the judge of what the command
line did with them.

A :class:`FuzzCase` is a case text plus the files it names (a series CSV) and
the command lines to try.  :func:`run_case` runs each command in a fresh
Python process with a time limit and a memory limit, the archive and the list
cache in a private folder, and :func:`classify` sorts the outcome:

* ``refused``  exit 1/2 with exactly one stderr line starting ``layers:``
* ``sound``    exit 0 and every archived file has finite temperatures above
               absolute zero (``check`` archives nothing and must not); a
               sweep file's NaN padding is allowed where it is padding (see
               :func:`_sweep_problem`), and ``layers size``'s exit 1 "no
               candidate meets every criterion" is an answer, judged as exit 0
* ``crash``    exit 3, any other status, or a traceback
* ``hang``     over the time limit, or out of memory under the memory limit;
               except ``long``: over the time limit, but ``layers check``
               said beforehand that the work takes about that long (its
               ``work`` line's estimate, to its factor of three, reaches the
               limit): long work a user was told of, shown by a progress
               bar and stopped cleanly by Ctrl-C, is not a hang
* ``unsound``  exit 0 with non-finite or below-absolute-zero values archived,
               or a file left in the archive by a refused command
* ``bad-message``  a refusal of more than one line, an echo of more than
               80 characters of the input, or a raw numpy warning

Cases come from three sources: the demo cases in ``cases/`` (shortened so a
run takes about a second), small cases written here, and fixed reproductions
of the defect classes the project knows about (:func:`known_cases`).
:func:`campaign` draws seeded mutations of the first two.  The ``[[sweep]]``
and ``[uncertainty]`` tables have their own small bases
(:func:`variation_documents`, tried with ``check`` and ``sweep``, or ``check``,
``run`` and ``size``), fixed examples (:func:`variation_known_cases`) and
seeded mutations (:func:`variation_campaign`).
"""

from __future__ import annotations

import copy
import math
import os
import random
import re
import resource
import shutil
import subprocess
import sys
import threading
import time
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
CASES = ROOT / "cases"

ABSOLUTE_ZERO_C = -273.15
ECHO_LIMIT = 80  # characters of the input a message may repeat
LINE_LIMIT = 400  # characters of one message line, path included
MEMORY_LIMIT = 3 * 1024**3  # bytes of address space per command
SEVERITY = ["unsound", "hang", "crash", "bad-message", "long", "refused", "sound"]
#: ``check``'s estimate is good to a factor of about this (layers.report.work_estimate).
ESTIMATE_FACTOR = 3.0
NUMPY_WARNINGS = ("divide by zero encountered", "invalid value encountered", "overflow encountered", "underflow encountered")


# --------------------------------------------------------------------------
# TOML writing (enough for case files; no third-party writer needed)


def to_toml(doc: dict) -> str:
    """TOML text for a nested dict (the package's own writer, layers.api.toml_text)."""
    from layers.api import toml_text

    return toml_text(doc)


# --------------------------------------------------------------------------
# Base cases


def _csv(rows: int = 49, start_hour: int = 0) -> str:
    lines = ["time,T_out,I_south,RH,wind"]
    for i in range(rows):
        h = start_hour + i
        day, hour = divmod(h, 24)
        t = 5 + 6 * math.sin(2 * math.pi * (hour - 9) / 24)
        sun = max(0.0, 500 * math.sin(math.pi * (hour - 6) / 12)) if 6 <= hour <= 18 else 0.0
        lines.append(f"2026-01-{10 + day:02d}T{hour:02d}:00,{t:.2f},{sun:.1f},{80 - t:.1f},{3 + hour % 4}")
    return "\n".join(lines) + "\n"


SMALL_CSV = _csv()

SMALL_CASES: dict[str, str] = {
    "wall": """
title = "fuzz: two-layer wall, daily cycle"
[[layers]]
material = "brick"
thickness = "200 mm"
contact_resistance = "0.01 m2*K/W"
[[layers]]
material = "mineral-wool"
thickness = "100 mm"
[series.cycles.t]
mean = "5 degC"
amplitude = "5 K"
peak_hour = 14
[inside]
type = "film"
air_temperature = "20 degC"
surface_resistance = "0.13 m2*K/W"
[outside]
type = "film"
air_temperature = "series:t"
surface_resistance = "0.04 m2*K/W"
relative_humidity = "80 %"
[time]
start = "2026-01-10T00:00"
duration = "2 d"
step = "1 h"
output_every = "2 h"
initial = "steady"
[mesh]
max_cell = "20 mm"
growth = 1.25
""",
    "flux": """
title = "fuzz: heated slab, insulated back"
[[layers]]
material = "concrete"
thickness = "150 mm"
[inside]
type = "flux"
heat_flux = "50 W/m2"
[outside]
type = "adiabatic"
[time]
duration = "1 d"
step = "30 min"
initial = "20 degC"
scheme = "backward-euler"
""",
    "custom": """
title = "fuzz: own material, air gap, temperature boundary"
[materials.site-foam]
conductivity = "0.024 W/(m*K)"
density = "35 kg/m3"
specific_heat = "1400 J/(kg*K)"
[[layers]]
material = "gypsum-plaster"
thickness = "12.5 mm"
[[layers]]
kind = "air-gap"
resistance = "0.18 m2*K/W"
[[layers]]
material = "site-foam"
thickness = "80 mm"
cells = 6
[inside]
type = "temperature"
surface_temperature = "21 degC"
[outside]
type = "film"
air_temperature = "-5 degC"
film_coefficient = "25 W/(m2*K)"
[time]
duration = "12 h"
step = "15 min"
output_every = "1 h"
initial = "10 degC"
scheme = "crank-nicolson"
[mesh]
max_cell = "10 mm"
min_cells = 3
""",
    "pipe": """
title = "fuzz: insulated pipe, auto film"
[geometry]
kind = "cylinder"
inner_radius = "30 mm"
[[layers]]
material = "steel"
thickness = "3 mm"
[[layers]]
material = "mineral-wool-pipe"
thickness = "40 mm"
[inside]
type = "film"
air_temperature = "120 degC"
film_coefficient = "500 W/(m2*K)"
[outside]
type = "film"
air_temperature = "15 degC"
film_coefficient = "auto"
wind_speed = "2 m/s"
jacket = "aluminium-oxidised"
[time]
duration = "6 h"
step = "5 min"
output_every = "30 min"
initial = "15 degC"
[mesh]
max_cell = "5 mm"
""",
    "freeze": """
title = "fuzz: stagnant water line"
[geometry]
kind = "cylinder"
inner_radius = "13 mm"
[[layers]]
material = "steel"
thickness = "3 mm"
[[layers]]
material = "pur-pipe"
thickness = "30 mm"
[inside]
type = "contents"
contents = "water"
initial_temperature = "6 degC"
[outside]
type = "film"
air_temperature = "-12 degC"
film_coefficient = "auto"
wind_speed = "4 m/s"
[time]
duration = "12 h"
step = "5 min"
output_every = "30 min"
initial = "steady"
[mesh]
max_cell = "5 mm"
""",
    "weather": """
title = "fuzz: wall under a small weather file"
[[layers]]
material = "brick"
thickness = "240 mm"
[[layers]]
material = "mineral-wool"
thickness = "120 mm"
[series]
file = "weather.csv"
time = "time"
timezone = "+01:00"
[series.columns]
t_out = {column = "T_out", unit = "degC"}
solar = {column = "I_south", unit = "W/m2"}
rh = {column = "RH", unit = "%"}
wind = {column = "wind", unit = "m/s"}
[inside]
type = "film"
air_temperature = "20 degC"
surface_resistance = "0.13 m2*K/W"
[outside]
type = "film"
air_temperature = "series:t_out"
film_coefficient = "auto"
emissivity = 0.9
solar_absorptance = 0.6
solar_irradiance = "series:solar"
wind_speed = "series:wind"
relative_humidity = "series:rh"
[time]
step = "1 h"
initial = "steady"
[mesh]
max_cell = "20 mm"
""",
}


def _demo_cases() -> dict[str, dict]:
    """The demo cases, shortened to at most a day so one run takes about a second."""
    out = {}
    for path in sorted(CASES.glob("*.toml")):
        doc = tomllib.loads(path.read_text(encoding="utf-8"))
        doc.pop("sizing", None)
        t = doc.setdefault("time", {})
        t.pop("end", None)
        t["duration"] = "1 d" if "series" in doc and "file" in doc["series"] else min(t.get("duration", "1 d"), "1 d", key=_hours)
        if _hours(t.get("step", "10 min")) < 1 / 6:
            t["step"] = "10 min"
            t["output_every"] = "1 h"
        out[f"demo:{path.stem}"] = doc
    return out


def _hours(text: str) -> float:
    number, unit = str(text).split()
    return float(number) * {"min": 1 / 60, "h": 1, "d": 24}[unit]


def base_documents() -> dict[str, dict]:
    bases = {name: tomllib.loads(text) for name, text in SMALL_CASES.items()}
    bases.update(_demo_cases())
    return bases


def _series_files(doc: dict) -> dict[str, bytes]:
    """The files a base case names: the small weather file, or the demo weather year."""
    name = doc.get("series", {}).get("file")
    if name == "weather.csv":
        return {"weather.csv": SMALL_CSV.encode()}
    if name:
        return {name: (CASES / name).read_bytes()}
    return {}


# --------------------------------------------------------------------------
# Cases and mutations


@dataclass
class FuzzCase:
    """One input: the case text, the files beside it, and what to run."""

    name: str
    text: str
    files: dict[str, bytes] = field(default_factory=dict)
    commands: tuple[str, ...] = ("check", "run")  # see run_case for the special ones
    injected: tuple[str, ...] = ()  # strings whose echo in a message is limited
    description: str = ""
    hint: str = ""  # a word a refusal must contain (e.g. "UTF-8" for a UTF-16 file)

    @property
    def id(self) -> str:
        return re.sub(r"[^A-Za-z0-9_.:+-]+", "_", self.name)[:90]


NUMBERS = [0, -1, 1e-300, 1e300, float("nan"), float("inf"), float("-inf"), -1e300, 2**63, 1e-12]
LONG = "x" * 5000
STRINGS = [
    "", " ", "0 mm", "-5 mm", "1e-300 mm", "1e300 mm", "9**9**9 mm", "2**99999 m", "nan mm", "inf K", "-inf degC",
    "20 kg", "1/0 m", "(1e308)*10 m", "20 degC degC", "0 K", "-300 degC", "1e300 degC", "1e-300 s", "1e300 s",
    "series:nope", "series:", "auto", "steady", "\u2103 20", "20 \u00b0C", "\u4e8c\u5341 mm", "\x00", "10 min",
    "100 mm", "1 m**-99999", LONG, "20 degC" + " " * 3000 + "x", "🔥", "1" * 400 + " mm",
]
OTHER_TYPES: list[object] = [True, False, [], [1, 2], ["1 m"], {}, {"a": 1}, {"value": "1 m"}]
UNITS = ["mm", "m", "in", "K", "degC", "degF", "W/m2", "W/(m*K)", "kg/m3", "s", "h", "%", "deg", "m2*K/W", "kg", "Pa",
         "1/s", "dimensionless", "furlong", "mK", "MK", "nm", "Gm", "ms", "year", "bogus", "", "m/s"]
TIMES = ["1500-01-01T00:00", "0001-01-01T00:00", "9999-12-31T23:00", "2026-07-01T00:00+99:99",
         "2026-07-01T00:00-99:00", "localtime", "2026-02-30T00:00", "2026-07-01T25:00", "now", 0, 1767225600,
         "1767225600", "2262-04-12T00:00", "1677-09-21T00:00", "2026-07-01", "2026-07-01T00:00Z",
         "2026-07-01T00:00+14:00", "+275760-09-13T00:00"]
TIME_KEYS = {"start": TIMES, "end": TIMES, "duration": ["0 s", "1e-300 s", "1e300 s", "365 d", "100000 d", "-1 d", "1 d"],
             "step": ["10 ms", "1 ns", "0 s", "1e-300 s", "7 min", "1 d", "-1 h"],
             "output_every": ["1 ns", "10 ms", "7 s", "1000 d", "0 s"], "period": ["1 ms", "1e300 s", "0 s"],
             "initial": ["periodic", "steady", "-300 degC", "1e300 degC", "0 K", "nan", 1e300, "hot"],
             "scheme": ["exact", "tr-bdf2", "euler", "", 1]}


def _leaves(doc: object, path: tuple = ()) -> list[tuple]:
    out = []
    if isinstance(doc, dict):
        for k, v in doc.items():
            out.extend(_leaves(v, path + (k,)) if isinstance(v, (dict, list)) and v else [path + (k,)])
    elif isinstance(doc, list):
        for i, v in enumerate(doc):
            out.extend(_leaves(v, path + (i,)) if isinstance(v, (dict, list)) and v else [path + (i,)])
    return out


def _tables(doc: object, path: tuple = ()) -> list[tuple]:
    out = []
    if isinstance(doc, dict):
        out.append(path)
        for k, v in doc.items():
            out.extend(_tables(v, path + (k,)))
    elif isinstance(doc, list):
        for i, v in enumerate(doc):
            out.extend(_tables(v, path + (i,)))
    return out


def _get(doc, path):
    for p in path:
        doc = doc[p]
    return doc


def _set(doc, path, value):
    _get(doc, path[:-1])[path[-1]] = value


def _dotted(path: tuple) -> str:
    return ".".join(str(p + 1) if isinstance(p, int) else p for p in path)


def _misspell(key: str, rng: random.Random) -> str:
    how = rng.randrange(5)
    if how == 0 and len(key) > 1:
        i = rng.randrange(len(key))
        return key[:i] + key[i + 1:]
    if how == 1:
        return key.upper()
    if how == 2:
        return key.replace("_", "-") if "_" in key else key + "s"
    if how == 3:
        return key + " "
    return "\u0301" + key


def mutate(name: str, doc: dict, files: dict[str, bytes], rng: random.Random) -> FuzzCase:
    """One seeded mutation of a base document."""
    doc = copy.deepcopy(doc)
    files = dict(files)
    injected: list[str] = []
    kind = rng.choice(["value", "value", "value", "unit", "drop", "misspell", "type", "time", "time", "series", "raw"])
    if kind == "series" and not files:
        kind = "time"
    leaves = [p for p in _leaves(doc) if p[0] != "title"]
    what = kind
    if kind == "value":
        path = rng.choice(leaves)
        old = _get(doc, path)
        pool = NUMBERS if isinstance(old, (int, float)) and not isinstance(old, bool) else STRINGS
        if rng.random() < 0.25:
            pool = NUMBERS + STRINGS
        new = rng.choice(pool)
        _set(doc, path, new)
        what = f"{_dotted(path)} = {new!r:.40}"
        if isinstance(new, str):
            injected.append(new)
    elif kind == "unit":
        quantities = [p for p in leaves if isinstance(_get(doc, p), str) and re.match(r"^-?[0-9.]+\s+\S", _get(doc, p))]
        path = rng.choice(quantities or leaves)
        old = str(_get(doc, path))
        number = old.split()[0] if old.split() else "1"
        new = f"{number} {rng.choice(UNITS)}".strip()
        _set(doc, path, new)
        what = f"{_dotted(path)} = {new!r}"
    elif kind == "drop":
        path = rng.choice(leaves + [t for t in _tables(doc) if t])
        parent = _get(doc, path[:-1])
        if isinstance(parent, list):
            parent.pop(path[-1])
        else:
            del parent[path[-1]]
        what = f"drop {_dotted(path)}"
    elif kind == "misspell":
        path = rng.choice([p for p in leaves if isinstance(p[-1], str)])
        parent = _get(doc, path[:-1])
        new_key = _misspell(path[-1], rng)
        parent[new_key] = parent.pop(path[-1])
        what = f"rename {_dotted(path)} -> {new_key!r}"
    elif kind == "type":
        path = rng.choice(leaves)
        new = rng.choice(OTHER_TYPES)
        _set(doc, path, new)
        what = f"{_dotted(path)} = {new!r}"
    elif kind == "time":
        key = rng.choice(list(TIME_KEYS))
        new = rng.choice(TIME_KEYS[key])
        doc.setdefault("time", {})[key] = new
        if key == "end":
            doc["time"].pop("duration", None)
        what = f"time.{key} = {new!r}"
    elif kind == "series":
        fname = next(iter(files))
        files[fname], what = mutate_csv(files[fname], rng)
        hint = "UTF-8" if what == "CSV in UTF-16" else ""
        return FuzzCase(f"{name}|{what}", to_toml(doc), files, description=what, hint=hint)
    else:  # raw text edits: duplicated tables, stray bytes
        text = to_toml(doc)
        edit = rng.randrange(4)
        if edit == 0:
            header = rng.choice(re.findall(r"^\[[^\[\]]+\]$", text, re.M) or ["[time]"])
            text += f"\n{header}\n"
            what = f"duplicate table {header}"
        elif edit == 1:
            text = text.replace("[[layers]]", "[layers]", 1)
            what = "[[layers]] written as [layers]"
        elif edit == 2:
            cut = rng.randrange(len(text))
            text = text[:cut]
            what = f"text cut at {cut}"
        else:
            text = "\ufeff" + text.replace("\n", "\r\n")
            what = "BOM and CRLF"
        return FuzzCase(f"{name}|{what}", text, files, injected=tuple(injected), description=what)
    return FuzzCase(f"{name}|{what}", to_toml(doc), files, injected=tuple(injected), description=what)


def mutate_csv(data: bytes, rng: random.Random) -> tuple[bytes, str]:
    """A mutated series file and a few words saying how."""
    text = data.decode("utf-8")
    lines = text.splitlines()
    head = next(i for i, line in enumerate(lines) if line.startswith("time"))
    body = lines[head + 1:]
    how = rng.randrange(10)
    if how == 0:
        return text.encode("utf-16"), "CSV in UTF-16"  # mutate() sets the UTF-8 hint
    if how == 1:
        return "\n".join(line.replace(",", ";", 2) if i % 7 == 3 else line for i, line in enumerate(lines)).encode(), "stray delimiters"
    if how == 2:
        i = head + 1 + rng.randrange(max(1, len(body) - 1))
        return "\n".join(lines[:i + 1] + [lines[i]] + lines[i + 1:]).encode(), "duplicated time"
    if how == 3:
        i = head + 1 + rng.randrange(max(1, len(body) - 1))
        parts = lines[i].split(",")
        lines[i] = ",".join([parts[0]] + ["nan"] * (len(parts) - 1))
        return "\n".join(lines).encode(), "NaN row"
    if how == 4:
        import datetime as dt

        out = lines[:head + 1]
        for line in body:
            t, rest = line.split(",", 1)
            epoch = int(dt.datetime.fromisoformat(t).replace(tzinfo=dt.timezone.utc).timestamp())
            out.append(f"{epoch},{rest}")
        return "\n".join(out).encode(), "epoch seconds in the time column"
    if how == 5:
        return "\n".join(lines[:head + 1]).encode(), "header only"
    if how == 6:
        return b"", "empty file"
    if how == 7:
        return "\n".join(lines[:head + 1] + [line.replace("2026", "1500") for line in body]).encode(), "year 1500 rows"
    if how == 8:
        i = head + 1 + rng.randrange(max(1, len(body) - 1))
        lines[i] = lines[i].split(",")[0] + "," + "9" * 400
        return "\n".join(lines).encode(), "overlong number"
    return "\n".join(lines[:head + 1] + [line.replace(":00,", ":00+99:99,", 1) for line in body]).encode(), "+99:99 offsets"


def campaign(seed: int, count: int) -> list[FuzzCase]:
    """``count`` seeded mutations, spread evenly over the base cases."""
    bases = base_documents()
    names = sorted(bases)
    out = []
    for i in range(count):
        rng = random.Random(seed * 1_000_003 + i)
        name = names[i % len(names)]
        case = mutate(name, bases[name], _series_files(bases[name]), rng)
        case.name = f"s{seed}-{i:04d}:{case.name}"
        case.commands = _base_commands(bases[name])
        out.append(case)
    return out


def _base_commands(doc: dict) -> tuple[str, ...]:
    """check and run; a demo case with [[sweep]] or [uncertainty] as those tables are used."""
    return _variation_commands(doc) if "sweep" in doc or "uncertainty" in doc else ("check", "run")


def base_cases() -> list[FuzzCase]:
    """The unmutated bases: each must run soundly (a check of the harness itself)."""
    bases = base_documents()
    return [FuzzCase(f"base:{n}", to_toml(d), _series_files(d), _base_commands(d)) for n, d in sorted(bases.items())]


# --------------------------------------------------------------------------
# Fixed reproductions of the known defect classes


def _small(name: str, **edits) -> dict:
    doc = tomllib.loads(SMALL_CASES[name])
    for dotted, value in edits.items():
        path = tuple(int(p) - 1 if p.isdigit() else p for p in dotted.split("."))
        node = doc
        for p in path[:-1]:
            node = node.setdefault(p, {}) if isinstance(p, str) else node[p]
        if value is None:
            node.pop(path[-1], None)
        else:
            node[path[-1]] = value
    return doc


def _k(name: str, doc: dict, files: dict | None = None, commands=("check", "run"), injected=(), hint="") -> FuzzCase:
    files = files if files is not None else _series_files(doc)
    return FuzzCase(f"known:{name}", to_toml(doc), files, tuple(commands), tuple(injected), hint=hint)


def known_cases() -> list[FuzzCase]:
    csv_lines = SMALL_CSV.splitlines()
    weather = _small("weather")
    epoch_csv = mutate_csv(SMALL_CSV.encode(), _Fixed(4))[0]
    return [
        # results outside physics archived with exit 0
        _k("flux-extraction-insulated", _small("flux", **{"inside.heat_flux": "-3000 W/m2", "time.duration": "10 d", "time.step": "1 h"})),
        _k("cycle-below-0K", _small("wall", **{"series.cycles.t.mean": "-250 degC", "series.cycles.t.amplitude": "100 K"})),
        _k("layer-1e-300-mm", _small("wall", **{"layers.1.thickness": "1e-300 mm"})),
        _k("first-cell-1e-300-m", _small("wall", **{"mesh.first_cell": "1e-300 m"})),
        _k("first-cell-1e-300-m-graded", _small("custom", **{"mesh.first_cell": "1e-300 m", "layers.3.cells": None})),
        # sizes not checked before work
        _k("units-9**9**9", _small("wall", **{"layers.1.thickness": "9**9**9 mm"}), injected=["9**9**9 mm"]),
        _k("year-at-10-ms", _small("flux", **{"time.duration": "365 d", "time.step": "10 ms", "time.output_every": "1 d"})),
        # time axes
        _k("start-year-1500", _small("wall", **{"time.start": "1500-01-01T00:00"})),
        _k("start-year-9999", _small("wall", **{"time.start": "9999-12-31T00:00"})),
        _k("offset-99:99", _small("wall", **{"time.start": "2026-01-10T00:00+99:99"})),
        _k("series-timezone-99:99", {**weather, "series": {**weather["series"], "timezone": "+99:99"}}),
        _k("series-epoch-seconds", weather, {"weather.csv": epoch_csv}),
        _k("start-localtime", _small("wall", **{"time.start": "localtime"})),
        # crashes
        _k("auto-film-5000-degC", _small("pipe", **{"outside.air_temperature": "5000 degC"})),
        _k("auto-film-wind-1e6", _small("pipe", **{"outside.wind_speed": "1e6 m/s"})),
        _k("auto-film-0-K", _small("pipe", **{"outside.air_temperature": "0 K", "time.initial": "0 K"})),
        _k("auto-film-planar-0-K", _small("wall", **{"outside.air_temperature": "0 K", "outside.surface_resistance": None, "outside.film_coefficient": "auto"})),
        _k("thickness-1e300-m", _small("wall", **{"layers.2.thickness": "1e300 m"})),
        _k("pipe-radius-1e300-m", _small("pipe", **{"geometry.inner_radius": "1e300 m"})),
        _k("jacket-list", _small("pipe", **{"outside.jacket": ["aluminium-oxidised"]})),
        _k("series-time-key-int", {**weather, "series": {**weather["series"], "time": 5}}),
        _k("archive-is-a-file", _small("flux"), commands=("run-archive-file",)),
        _k("archive-read-only", _small("flux"), commands=("run-archive-readonly",)),
        _k("list-corrupt-cache", _small("flux"), commands=("list-corrupt-cache",)),
        _k("compare-all-nan", _small("flux"), commands=("compare-all-nan",)),
        _k("again-bit-flipped", _small("flux"), commands=("again-bit-flipped",)),
        # messages
        _k("series-utf16", weather, {"weather.csv": SMALL_CSV.encode("utf-16")}, hint="UTF-8"),
        _k("long-material-name", _small("wall", **{"layers.1.material": LONG}), injected=[LONG]),
        _k("long-quantity", _small("wall", **{"layers.1.thickness": "1" * 300 + " mm"}), injected=["1" * 300 + " mm"]),
        _k("long-unit", _small("wall", **{"layers.1.thickness": "1 " + "m" * 300}), injected=["1 " + "m" * 300]),
        _k("long-series-cell", weather, {"weather.csv": "\n".join(csv_lines[:3] + [csv_lines[3].split(",")[0] + "," + "7" * 300 + ",0,80,3"] + csv_lines[4:]).encode()}, injected=["7" * 300]),
    ]


class _Fixed(random.Random):
    """A Random whose randrange returns a fixed first choice (to pick one CSV mutation)."""

    def __init__(self, first: int) -> None:
        super().__init__(0)
        self._first = first

    def randrange(self, *args, **kwargs):  # noqa: D401
        first, self._first = self._first, None
        return first if first is not None else super().randrange(*args, **kwargs)


# --------------------------------------------------------------------------
# Sweeps and uncertainty: small bases with [[sweep]] or [uncertainty], and
# mutations of those tables.  Every value here is invented for the fuzz tests
# (no measured data, no product's figures).


def _variation_base(name: str, table: str, value, **edits) -> dict:
    doc = _small(name, **edits)
    doc[table] = value
    return doc


def variation_documents() -> dict[str, dict]:
    """Small cases with a ``[[sweep]]`` grid (2-8 points) or an ``[uncertainty]``
    table (8-64 samples), each command taking about a second (invented data)."""
    docs: dict[str, dict] = {}
    # a generated daily cycle (stepping, one point at a time), with [sizing] so size is tried too
    docs["sweep-wall"] = _variation_base("wall", "sweep", [
        {"name": "wool", "key": "layers.2.thickness", "values": ["60 mm", "100 mm", "140 mm"]},
        {"name": "r_out", "key": "outside.surface_resistance", "range": {"from": "0.04 m2*K/W", "to": "0.08 m2*K/W", "count": 2}},
    ], **{"time.duration": "1 d"})
    docs["sweep-wall"]["sizing"] = {"layer": 2, "thicknesses": ["60 mm", "100 mm", "160 mm"], "max_heat_loss": "20 W/m2"}
    # linear points (the exact modal batch) next to stepping ones: the scheme is swept
    docs["sweep-custom"] = _variation_base("custom", "sweep", [
        {"name": "foam_k", "key": "materials.site-foam.conductivity", "range": {"from": "0.02 W/(m*K)", "to": "0.04 W/(m*K)", "count": 2}},
        {"name": "method", "key": "time.scheme", "values": ["crank-nicolson", "exact", "auto"]},
    ])
    # meshes of different sizes with the cell field kept: a padded cell axis (NaN beyond a point's cells)
    docs["sweep-pipe-cells"] = _variation_base("pipe", "sweep", [
        {"name": "wool", "key": "layers.2.thickness", "values": ["20 mm", "40 mm", "70 mm"]},
    ], **{"time.keep_temperature": True, "time.duration": "3 h"})
    # points with and without sun: sol-air temperatures NaN at the points without
    # (a given film and no absorptance); an automatic film next to a given one
    docs["sweep-weather-sun"] = _variation_base("weather", "sweep", [
        {"name": "absorptance", "key": "outside.solar_absorptance", "values": [0, 0.6]},
        {"name": "h_out", "key": "outside.film_coefficient", "values": ["auto", "15 W/(m2*K)"]},
    ], **{"time.duration": "1 d"})
    # no film anywhere (stepping), three dimensions, a swept step and material
    docs["sweep-flux"] = _variation_base("flux", "sweep", [
        {"name": "q", "key": "inside.heat_flux", "values": ["20 W/m2", "50 W/m2"]},
        {"name": "dt", "key": "time.step", "values": ["30 min", "1 h"]},
        {"name": "slab", "key": "layers.1.material", "values": ["concrete", "brick"]},
    ], **{"time.output_every": "1 h"})
    # contents that may freeze: per-point freeze times
    docs["sweep-freeze"] = _variation_base("freeze", "sweep", [
        {"name": "foam", "key": "layers.2.thickness", "values": ["10 mm", "30 mm"]},
    ], **{"time.duration": "6 h"})

    # uncertainty: linear (sampled in one modal batch) and stepping cases
    docs["unc-custom"] = _variation_base("custom", "uncertainty", {
        "samples": 16, "seed": 1, "vary": {
            "materials.site-foam.conductivity": {"relative_sd": "8 %"},
            "outside.air_temperature": {"sd": "2 K"},
        }})
    docs["unc-wall-size"] = _variation_base("wall", "uncertainty", {
        "samples": 12, "seed": 2, "confidence": 0.9, "vary": {
            "outside.surface_resistance": {"low": "0.02 m2*K/W", "high": "0.06 m2*K/W"},
            "inside.air_temperature": {"sd": "1 K"},
            "layers.1.thickness": {"sd": "5 mm"},
        }}, **{"time.duration": "1 d"})
    docs["unc-wall-size"]["sizing"] = {"layer": 2, "thicknesses": ["60 mm", "100 mm", "160 mm"], "max_heat_loss": "20 W/m2",
                                       "dew_point_margin": "1 K"}
    docs["unc-pipe-size"] = _variation_base("pipe", "uncertainty", {
        "samples": 32, "seed": 3, "vary": {
            "inside.air_temperature": {"sd": "3 K"},
            "outside.film_coefficient": {"low": "5 W/(m2*K)", "high": "20 W/(m2*K)"},
        }}, **{"outside.film_coefficient": "10 W/(m2*K)", "outside.wind_speed": None, "outside.jacket": None,
               "outside.relative_humidity": "80 %", "time.duration": "3 h"})
    docs["unc-pipe-size"]["sizing"] = {"layer": 2, "thicknesses": {"from": "20 mm", "to": "100 mm", "step": "20 mm"},
                                       "max_surface_temperature": "40 degC", "max_heat_loss": "40 W/m"}
    docs["unc-weather"] = _variation_base("weather", "uncertainty", {
        "samples": 8, "vary": {
            "outside.solar_absorptance": {"low": 0.4, "high": 0.8},
            "layers.2.thickness": {"relative_sd": "10 %"},
        }}, **{"time.duration": "1 d"})
    docs["unc-flux"] = _variation_base("flux", "uncertainty", {
        "samples": 64, "seed": 5, "vary": {"inside.heat_flux": {"low": "20 W/m2", "high": "80 W/m2"}}})
    return docs


def _variation_commands(doc: dict) -> tuple[str, ...]:
    if "sweep" in doc:
        return ("check", "sweep") + (("size",) if "sizing" in doc else ())
    return ("check", "run") + (("size",) if "sizing" in doc else ())


def variation_base_cases() -> list[FuzzCase]:
    """The unmutated sweep and uncertainty bases: each must run soundly."""
    docs = variation_documents()
    return [FuzzCase(f"base:{n}", to_toml(d), _series_files(d), _variation_commands(d)) for n, d in sorted(docs.items())]


#: Sweep dimension names: invalid, reserved, or names of the result's variables,
#: dimensions and attributes (and of what netCDF itself writes).
SWEEP_NAMES: list[object] = [
    1, True, [], {}, "", " ", "1abc", "a-b", "a b", "a.b", "\u00e4", "\u03a9", "a" * 65, "a" * 64, LONG, "a\x00",
    "time", "x", "cell", "nv", "quantile", "sample", "point", "interface", "layer_interface", "x_bounds", "scheme",
    "radius", "thickness", "material", "layer", "temperature", "surface_temperature_outside", "heat_flow_inside",
    "sol_air_temperature_outside", "air_temperature_outside", "dew_point_outside", "energy_balance_error",
    "time_to_freezing_h", "contents_temperature", "ice_fraction", "film_coefficient_outside", "stored_energy",
    "steady_resistance_total", "probability_passes", "Time", "TIME", "X", "T", "_a", "sweep", "uncertainty", "title",
    "units", "coordinates", "bounds", "product", "string3", "string14", "strlen", "dim_0", "wool", "r_out",
]
#: Case keys a sweep or a sample may not take: bad paths, list items 0, negative,
#: huge or non-ASCII, tables and lists, nothing, fixed keys.
BAD_KEYS: list[object] = [
    1, True, [], {}, "", ".", "..", "layers", "layers.", ".layers.1.thickness", "layers..thickness", "layers.1",
    "layers.0.thickness", "layers.-1.thickness", "layers.99999999999999999999.thickness", "layers.1e0.thickness",
    "layers.\u0662.thickness", "layers.\u00b2.thickness", "layers.\uff11.thickness", "layers. 1.thickness",
    "layers.1 .thickness", "layers.+1.thickness", "layers.1.thickness.value", "layers.1.thickness.1", "layers.x.thickness",
    "inside", "outside", "time", "mesh", "nope", "nope.x", "outside.nope", "inside.air_temperature.x",
    "time.start", "time.end", "time.duration", "time.output_every", "time.keep_temperature", "title", "label",
    "sweep", "sweep.1.name", "uncertainty", "uncertainty.samples", "uncertainty.vary", "series", "series.file",
    "series.path", "series.columns", "sizing", "sizing.thicknesses", "materials", "materials.site-foam",
    "LAYERS.1.THICKNESS", "layers.1.Thickness", "\u0301layers.1.thickness", "layers.1.thickness ", LONG, "a." * 400 + "b",
    "layers.1.thickness\x00", "\U0001f525", "geometry.kind", "inside.type", "outside.type",
]
#: (key, values) that change what a point is: boundary kinds, geometry, materials,
#: schemes, steps, meshes, series, sizing; many are refused at one point.
SWEEP_TARGETS: list[tuple[str, list]] = [
    ("inside.type", ["film", "adiabatic"]), ("outside.type", ["film", "temperature", "flux", "adiabatic"]),
    ("inside.type", ["flux", "contents"]), ("geometry.kind", ["planar", "cylinder", "sphere"]),
    ("geometry.kind", ["cylinder", "sphere"]), ("layers.1.material", ["brick", "steel", "concrete"]),
    ("layers.1.material", ["brick", "no-such-material"]), ("layers.2.material", ["site-foam", "mineral-wool"]),
    ("layers.2.kind", ["air-gap", "layer"]), ("layers.1.kind", ["air-gap"]),
    ("time.scheme", ["exact", "tr-bdf2", "crank-nicolson", "backward-euler", "auto"]), ("time.scheme", ["exact", "bogus"]),
    ("time.step", ["10 min", "20 min", "1 h", "2 h"]), ("time.step", ["1 h", "7 min"]), ("time.step", ["1 ns", "1 h"]),
    ("time.step", ["1 h", "1 h 0 min"]), ("time.initial", ["steady", "periodic", "10 degC"]),
    ("time.initial", ["-300 degC", "10 degC"]), ("time.initial", ["periodic", "steady"]), ("time.period", ["24 h", "12 h", "7 min"]),
    ("mesh.max_cell", ["1 mm", "20 mm"]), ("mesh.max_cell", ["1e-9 m", "20 mm"]), ("mesh.growth", [1.0, 1.5, 3]),
    ("mesh.first_cell", ["1e-300 m", "1 mm"]), ("mesh.min_cells", [1, 100000]),
    ("layers.1.thickness", ["1e-300 mm", "100 mm"]), ("layers.1.thickness", ["1e300 m", "1 m"]),
    ("layers.1.thickness", ["0 mm", "1 mm"]), ("layers.1.thickness", ["1 mm", "2 m"]), ("layers.1.cells", [1, 50, 100000]),
    ("inside.air_temperature", ["-273.15 degC", "20 degC"]), ("inside.air_temperature", ["0 K", "20 degC"]),
    ("inside.air_temperature", ["series:t", "20 degC"]), ("inside.air_temperature", ["series:nope", "20 degC"]),
    ("inside.air_temperature", ["2999 degC", "20 degC"]), ("outside.air_temperature", ["-100 degC", "90 degC"]),
    ("outside.film_coefficient", ["auto", "10 W/(m2*K)"]), ("outside.film_coefficient", ["0 W/(m2*K)", "1e300 W/(m2*K)"]),
    ("outside.surface_resistance", ["0 m2*K/W", "0.04 m2*K/W"]), ("outside.solar_absorptance", [0, 0.5, 1]),
    ("outside.emissivity", [0, 1, 1.5]), ("outside.relative_humidity", ["0 %", "100 %", "101 %"]),
    ("inside.heat_flux", ["-3000 W/m2", "50 W/m2"]), ("inside.heat_flux", ["1e300 W/m2", "1 W/m2"]),
    ("geometry.inner_radius", ["1 mm", "1e300 m"]), ("geometry.inner_radius", ["1 mm", "30 m"]),
    ("series.cycles.t.mean", ["-250 degC", "5 degC"]), ("series.cycles.t.amplitude", ["0 K", "100 K"]),
    ("series.cycles.t.peak_hour", [0, 24, 25]), ("series.timezone", ["+01:00", "+05:00"]), ("series.timezone", ["+01:00", "+99:99"]),
    ("series.columns.t_out.unit", ["degC", "degF", "K"]), ("series.time", ["time", "T_out"]),
    ("series.columns.t_out.column", ["T_out", "RH"]), ("materials.site-foam.conductivity", ["0 W/(m*K)", "1e-300 W/(m*K)"]),
    ("materials.site-foam.density", ["1e300 kg/m3", "35 kg/m3"]), ("materials.site-foam.specific_heat", ["1 J/(kg*K)", "1e9 J/(kg*K)"]),
    ("sizing.layer", [1, 2]), ("sizing.max_heat_loss", ["1 W/m2", "1e300 W/m2"]), ("inside.contents", ["water", "oil"]),
    ("inside.initial_temperature", ["-40 degC", "90 degC"]), ("outside.wind_speed", ["0 m/s", "1e6 m/s"]),
    ("outside.jacket", ["aluminium-oxidised", "nope"]), ("layers.1.contact_resistance", ["0 m2*K/W", "1e300 m2*K/W"]),
]
#: A [[sweep]] values list: empty, not a list, nested, duplicated (also across
#: units), mixed or absurd units, NaN and infinities, booleans, words.
BAD_VALUES: list[object] = [
    [], "60 mm", 60, {}, [[1]], [{}], [[]], ["60 mm", "6 cm"], ["60 mm", "60 mm"], [1, 1.0], [-0.0, 0.0], ["a", "a"],
    ["60 mm", 60], ["60 mm", "60 K"], ["60 mm", "60 furlong"], ["60 mm", "60 bogus"], ["60 mm", "0.06 m", "6e1 mm"],
    ["1e300 mm", "1 mm"], ["1e-300 mm", "1 mm"], [float("nan"), 1.0], [float("nan"), float("nan")], ["nan mm", "1 mm"],
    ["inf mm"], [float("inf")], [float("-inf"), 0], [True, False], ["", " "], [LONG], ["9**9**9 mm"], ["thick", "thin"],
    ["60 mm", "thick"], ["\u0661\u0660 mm"], ["2**99999 m"], ["-5 mm", "5 mm"], [2**63 - 1], ["1 m**-99999"],
    ["\U0001f525"], ["20 degC", "293.15 K"], ["20 degC", "68 degF"], ["20 degC", "300 K", "-300 degC"], ["60 mm", "1e308 km"],
    ["60 mm"], ["1" * 400 + " mm", "1 mm"], ["auto", "steady"],
]
#: A [[sweep]] range table.
BAD_RANGES: list[object] = [
    {"from": "60 mm", "to": "100 mm", "count": c} for c in (0, 1, -1, 2.5, "3", True, 2**62, 100001)
] + [
    {"from": a, "to": b, "count": 3} for a, b in (
        ("1 mm", "1 K"), (1, "1 mm"), ("1 mm", 1), ("1 mm", "1 mm"), ("1 mm", "1.0 mm"), ("1 mm", "0.1 cm"),
        (float("nan"), 1), ("nan mm", "1 mm"), (float("-inf"), 0), ("-1e308 m", "1e308 m"), ("1e308 m", "1e308 km"),
        ("a", "b"), ("series:t", "5 degC"), (True, False), ("100 mm", "60 mm"), ("60 mm", "0.2 m"), ("-300 degC", "20 degC"),
        ("1e-320 m", "2e-320 m"), ("0 degC", "40 degF"), (LONG, "1 mm"),
    )
] + [[1, 2, 3], "1..3", {}, {"from": "60 mm", "to": "100 mm"}, {"from": "60 mm", "to": "100 mm", "count": 3, "step": "1 mm"}]
#: A huge sweep grid (allowed up to 100,000 points) or one past the limit.
HUGE_SWEEPS: list[tuple[str, object]] = [
    ("range count 100000", {"from": "60 mm", "to": "200 mm", "count": 100000}),
    ("range count 100001", {"from": "60 mm", "to": "200 mm", "count": 100001}),
    ("range count 5000", {"from": "60 mm", "to": "200 mm", "count": 5000}),
    ("100000 values", [f"{60 + i * 0.001:.3f} mm" for i in range(100000)]),
    ("100001 values", [f"{60 + i * 0.001:.3f} mm" for i in range(100001)]),
    ("2000 values", [f"{60 + i * 0.01:.2f} mm" for i in range(2000)]),
]

#: [uncertainty] samples, seed and confidence.
BAD_SAMPLES: list[object] = [0, 7, 8, 9, 65, 10000, 100000, 100001, -1, 16.0, 1e5, "16", True, 2**63 - 1, float("nan"), []]
BAD_SEEDS: list[object] = [-1, 1.5, "1", True, 2**63 - 1, 0, float("nan"), 2**32, 2**32 - 1, [], "\U0001f525"]
BAD_CONFIDENCES: list[object] = [
    0.5, 0.4999, 1, 1.0, 0.999999999, 0.9999999999999999, "95 %", "95", "95 K", "abc", float("nan"), float("inf"), -0.9,
    True, "1e-300 %", [], "50 %", "100 %", "99.99999 %", "0.95 m/m", 95,
]
#: One distribution of [uncertainty.vary]: wrong forms, spreads of zero, negative,
#: too wide, NaN or infinite, units that do not fit, low above high.
BAD_SPECS: list[object] = (
    ["8 %", 8, [], {}, {"distribution": "normal"}, {"mean": 1, "sd": "1 K"}, {"sd": "1 K", "relative_sd": "1 %"},
     {"sd": "1 K", "low": 1, "high": 2}, {"low": 1}, {"high": 2}, {"relative_sd": "8 %", "Relative_sd": "8 %"}]
    + [{"relative_sd": v} for v in (0, 0.5, 0.51, "50 %", "51 %", "-8 %", "8 K", float("nan"), "8", "0 %", "1e-300 %", True,
                                    LONG, "8 %%", [], "1e-320")]
    + [{"sd": v} for v in ("0 K", "-2 K", "1e300 K", "nan K", "inf K", "2 degC", "2 degF", "2 mm", "2", 2, float("nan"),
                           "1e-300 K", "1e-300 mm", "1e300 mm", "0.01 W/(m*K)", "1 m2*K/W", "5 W/m2", True, "-inf mm")]
    + [{"low": a, "high": b} for a, b in (
        (1, 1), (2, 1), (1, "2 mm"), ("1 mm", "1 K"), (float("nan"), 1), (float("-inf"), float("inf")), (-1e308, 1e308),
        ("-1e308 m", "1e308 m"), ("a", "b"), ("1 mm", "1 cm"), ("20 degC", "300 K"), ("300 K", "20 degC"), (0, 1),
        ("0 W/m2", "1e300 W/m2"), ("-300 degC", "20 degC"), ("1e-320 m", "2e-320 m"), (True, False), ([], {}))]
)
#: (key, distribution) pairs that make impossible or extreme samples, or change
#: what a sample is (kind, scheme, step, mesh, series, sizing); "{sized}" is the sized layer.
UNCERTAINTY_TARGETS: list[tuple[str, dict]] = [
    ("layers.1.thickness", {"relative_sd": "50 %"}), ("layers.1.thickness", {"sd": "1 m"}),
    ("layers.1.thickness", {"low": "-5 mm", "high": "5 mm"}), ("layers.1.thickness", {"low": "1e-300 mm", "high": "1e-299 mm"}),
    ("layers.{sized}.thickness", {"relative_sd": "5 %"}), ("layers.{sized}.thickness", {"low": "10 mm", "high": "20 mm"}),
    ("layers.0{sized}.thickness", {"relative_sd": "5 %"}),
    ("inside.air_temperature", {"sd": "300 K"}), ("inside.air_temperature", {"relative_sd": "5 %"}),
    ("inside.air_temperature", {"low": "-300 degC", "high": "20 degC"}), ("inside.air_temperature", {"low": "-273.15 degC", "high": "-273 degC"}),
    ("inside.air_temperature", {"sd": "2 degF"}), ("inside.air_temperature", {"low": "2990 degC", "high": "3010 degC"}),
    ("outside.air_temperature", {"sd": "2 K"}), ("outside.air_temperature", {"low": "0 degC", "high": "10 degC"}),
    ("inside.type", {"low": 0, "high": 1}), ("time.scheme", {"low": 0, "high": 1}), ("time.step", {"sd": "1 min"}),
    ("time.step", {"low": "59 min", "high": "61 min"}), ("time.initial", {"sd": "2 K"}), ("time.period", {"sd": "1 h"}),
    ("mesh.max_cell", {"relative_sd": "50 %"}), ("mesh.growth", {"low": 1.0, "high": 3.0}), ("mesh.min_cells", {"low": 1, "high": 9}),
    ("geometry.inner_radius", {"relative_sd": "50 %"}), ("geometry.inner_radius", {"low": "1 mm", "high": "1e300 m"}),
    ("materials.site-foam.conductivity", {"sd": "0.1 W/(m*K)"}),
    ("materials.site-foam.conductivity", {"low": "1e-300 W/(m*K)", "high": "1e-299 W/(m*K)"}),
    ("outside.emissivity", {"low": 0, "high": 1}), ("outside.solar_absorptance", {"low": -1, "high": 2}),
    ("outside.surface_resistance", {"low": "0 m2*K/W", "high": "1e300 m2*K/W"}), ("inside.heat_flux", {"sd": "1e300 W/m2"}),
    ("inside.heat_flux", {"low": "-5000 W/m2", "high": "-3000 W/m2"}),
    ("series.cycles.t.mean", {"sd": "200 K"}), ("series.cycles.t.amplitude", {"relative_sd": "50 %"}),
    ("series.columns.t_out.unit", {"low": 0, "high": 1}), ("series.timezone", {"low": 0, "high": 1}),
    ("sizing.max_heat_loss", {"relative_sd": "20 %"}), ("sizing.thicknesses.from", {"sd": "5 mm"}),
    ("sizing.layer", {"low": 1, "high": 2}), ("sizing.max_surface_temperature", {"sd": "100 K"}),
    ("uncertainty.samples", {"low": 8, "high": 9}), ("layers.1.contact_resistance", {"relative_sd": "10 %"}),
    ("outside.wind_speed", {"sd": "1e6 m/s"}), ("inside.initial_temperature", {"sd": "10 K"}),
    ("time.keep_temperature", {"low": 0, "high": 1}), ("outside.relative_humidity", {"low": "90 %", "high": "110 %"}),
    ("outside.film_coefficient", {"low": "-1 W/(m2*K)", "high": "1 W/(m2*K)"}), ("layers.2.cells", {"low": 1, "high": 5}),
]


def _pick_sweep(doc: dict, rng: random.Random) -> dict:
    return rng.choice(doc["sweep"]) if isinstance(doc.get("sweep"), list) and doc["sweep"] else {}


def _sized(doc: dict) -> str:
    layer = doc.get("sizing", {}).get("layer", 2)
    return str(layer)


def _aliased(key: str) -> str:
    """The same case key written another way (a list item with a leading zero)."""
    return re.sub(r"\.(\d+)\.", lambda m: f".0{m.group(1)}.", key, count=1)


def _mutate_sweep(doc: dict, rng: random.Random, injected: list[str]) -> str:
    kind = rng.choice(["name", "name", "key", "key", "target", "target", "target", "values", "values", "range", "range",
                       "huge", "structure", "sized"])
    table = _pick_sweep(doc, rng)
    i = doc["sweep"].index(table) + 1
    if kind == "name":
        new = rng.choice(SWEEP_NAMES + [t["name"] for t in doc["sweep"]])
        table["name"] = new
        if isinstance(new, str):
            injected.append(new)
        return f"sweep.{i}.name = {new!r:.40}"
    if kind == "key":
        new = rng.choice(BAD_KEYS)
        table["key"] = new
        if isinstance(new, str):
            injected.append(new)
        return f"sweep.{i}.key = {new!r:.40}"
    if kind in ("target", "sized"):
        key, values = (f"layers.{_sized(doc)}.thickness", ["40 mm", "80 mm"]) if kind == "sized" else rng.choice(SWEEP_TARGETS)
        if kind == "sized" and rng.random() < 0.5:
            key, values = rng.choice([("sizing.layer", [1, 2]), ("sizing.max_heat_loss", ["5 W/m2", "50 W/m2"]),
                                      (_aliased(key), ["40 mm", "80 mm"])])
        table["key"] = key
        table.pop("range", None)
        table["values"] = list(values)
        return f"sweep.{i}: {key} = {values!r:.60}"
    if kind == "values":
        new = copy.deepcopy(rng.choice(BAD_VALUES))
        table.pop("range", None)
        table["values"] = new
        injected.extend(v for v in (new if isinstance(new, list) else [new]) if isinstance(v, str))
        return f"sweep.{i}.values = {new!r:.60}"
    if kind == "range":
        new = copy.deepcopy(rng.choice(BAD_RANGES))
        if rng.random() < 0.3 and "values" in table:
            table["range"] = new  # both values and range
            return f"sweep.{i}.range = {new!r:.60} beside values"
        table.pop("values", None)
        table["range"] = new
        if isinstance(new, dict):
            injected.extend(v for v in new.values() if isinstance(v, str))
        return f"sweep.{i}.range = {new!r:.60}"
    if kind == "huge":
        what, new = rng.choice(HUGE_SWEEPS)
        table = doc["sweep"][0]
        table.pop("values", None)
        table.pop("range", None)
        table["range" if isinstance(new, dict) else "values"] = new
        return f"sweep.1: {what}"
    # structure
    how = rng.randrange(12)
    if how == 0:
        doc["sweep"] = doc["sweep"][0]
        return "[sweep] written as a table"
    if how == 1:
        doc["sweep"] = rng.choice([[], "x", 1, [1, 2], [[]]])
        return f"sweep = {doc['sweep']!r}"
    if how == 2:
        table[rng.choice(["unit", "Name", "count", "step", "values "])] = "1"
        return f"sweep.{i}: an unknown key"
    if how == 3:
        doc["sweep"].append(copy.deepcopy(table))
        return f"sweep.{i} twice"
    if how == 4:
        doc["sweep"].append(dict(copy.deepcopy(table), name="other"))
        return f"sweep.{i}.key swept by two tables"
    if how == 5:
        doc["sweep"].append(dict(copy.deepcopy(table), name="alias", key=_aliased(table["key"])))
        return f"sweep.{i}.key swept again as {_aliased(table['key'])!r}"
    if how == 6:
        doc["uncertainty"] = {"samples": 8, "vary": {"inside.air_temperature": {"sd": "1 K"}}}
        return "[uncertainty] beside [[sweep]]"
    if how == 7:
        for t in doc["sweep"]:
            t.pop("values", None)
            t["range"] = {"from": 1, "to": 2, "count": 400}
        doc["sweep"] += [{"name": f"extra{j}", "key": f"mesh.{k}", "values": v} for j, (k, v) in
                         enumerate([("growth", [1.1, 1.2]), ("max_cell", ["20 mm", "30 mm"])])]
        return "a grid of more than 100000 points"
    if how == 8:
        doc["sweep"] = [{"name": f"d{j}", "key": key, "values": values} for j, (key, values) in
                        enumerate(rng.sample(SWEEP_TARGETS, 3))]
        return "three swept targets: " + ", ".join(t["key"] for t in doc["sweep"])
    if how == 9:
        table.pop("values", None)
        table.pop("range", None)
        return f"sweep.{i} with neither values nor range"
    if how == 10:
        del table[rng.choice(["name", "key"])]
        return f"sweep.{i} without name or key"
    table["values"] = ["60 mm"]
    table.pop("range", None)
    return f"sweep.{i} of one value"


def _mutate_uncertainty(doc: dict, rng: random.Random, injected: list[str]) -> str:
    table = doc["uncertainty"]
    vary = table.setdefault("vary", {})
    kind = rng.choice(["samples", "samples", "seed", "confidence", "vary", "key", "key", "spec", "spec", "spec",
                       "target", "target", "target", "alias", "many", "sweep"])
    if kind in ("samples", "seed", "confidence"):
        new = rng.choice({"samples": BAD_SAMPLES, "seed": BAD_SEEDS, "confidence": BAD_CONFIDENCES}[kind])
        table[kind] = new
        return f"uncertainty.{kind} = {new!r}"
    if kind == "vary":
        new = rng.choice([None, {}, "x", [1], {"": {"sd": "1 K"}}, {"layers.1.thickness": {"sd": "1 mm"}, "": {}}])
        if new is None:
            del table["vary"]
        else:
            table["vary"] = new
        return f"uncertainty.vary = {new!r}"
    old = rng.choice(list(vary) or ["layers.1.thickness"])
    spec = vary.pop(old, {"sd": "1 mm"})
    if kind == "key":
        new = rng.choice(BAD_KEYS)
        if not isinstance(new, str):
            new = str(new)
        vary[new] = spec
        injected.append(new)
        return f"uncertainty.vary: {old!r} -> {new!r:.40}"
    if kind == "spec":
        new = copy.deepcopy(rng.choice(BAD_SPECS))
        vary[old] = new
        if isinstance(new, dict):
            injected.extend(v for v in new.values() if isinstance(v, str))
        return f"uncertainty.vary.{old} = {new!r:.60}"
    if kind == "target":
        key, new = rng.choice(UNCERTAINTY_TARGETS)
        key = key.replace("{sized}", _sized(doc))
        vary[old] = spec
        vary[key] = copy.deepcopy(new)
        return f"uncertainty.vary.{key} = {new!r:.60}"
    if kind == "alias":  # one case key under two spellings (a list item with a leading zero)
        vary[old] = spec
        key, alias = rng.choice([("layers.1.thickness", "layers.01.thickness"), (None, f"layers.0{_sized(doc)}.thickness")])
        if key:
            vary[key] = {"sd": "5 mm"}
        vary[alias] = {"relative_sd": "5 %"}
        return f"uncertainty.vary: {alias!r}" + (f" beside {key!r}" if key else "")
    if kind == "many":
        vary[old] = spec
        for path in _leaves(doc):
            if path[0] in ("uncertainty", "sizing", "title", "series", "time") or not isinstance(_get(doc, path), str):
                continue
            parts = quantity_parts_of(_get(doc, path))
            if parts is None:
                continue
            key = ".".join(str(p + 1) if isinstance(p, int) else p for p in path)
            vary.setdefault(key, {"sd": "0.5 K"} if parts[1] in ("degC", "degF") else {"relative_sd": "1 %"})
        table["samples"] = 8
        if rng.random() < 0.5:  # and one impossible spread: the refusal names a sample of every key
            vary["mesh.growth"] = {"low": 0.1, "high": 0.2}
            return f"uncertainty.vary: every quantity of the case ({len(vary)} keys), one impossible"
        return f"uncertainty.vary: every quantity of the case ({len(vary)} keys)"
    vary[old] = spec
    doc["sweep"] = [{"name": "wool", "key": "layers.1.thickness", "values": ["100 mm", "200 mm"]}]
    return "[[sweep]] beside [uncertainty]"


def quantity_parts_of(text: str) -> tuple[float, str] | None:
    """(number, unit) of a quantity text like "20 degC" (a loose reading, for choosing keys)."""
    m = re.fullmatch(r"\s*([-+]?[0-9.]+(?:[eE][-+]?\d+)?)\s+(\S.*)", text)
    return (float(m.group(1)), m.group(2).strip()) if m else None


def mutate_variation(name: str, doc: dict, files: dict[str, bytes], rng: random.Random) -> FuzzCase:
    """One seeded mutation of a sweep or uncertainty base: mostly of its
    [[sweep]] / [uncertainty] table, sometimes (one in five) a generic mutation."""
    commands = _variation_commands(doc)
    if rng.random() < 0.2:
        case = mutate(name, doc, files, rng)
        case.commands = commands
        return case
    doc = copy.deepcopy(doc)
    injected: list[str] = []
    what = _mutate_sweep(doc, rng, injected) if "sweep" in doc else _mutate_uncertainty(doc, rng, injected)
    if _runs_asked(doc) > MAX_SEEDED_RUNS:
        commands = ("check",)  # check must answer at once; the runs themselves take minutes by design
    try:
        text = to_toml(doc)
    except Exception:  # noqa: BLE001 - a value TOML cannot hold: write it as text the reader must refuse
        text = to_toml({k: v for k, v in doc.items() if k not in ("sweep", "uncertainty")}) + f"\n# unwritable: {what}\n"
    return FuzzCase(f"{name}|{what}", text, dict(files), commands, tuple(s for s in injected if isinstance(s, str)), what)


def _vk(name: str, base: str, commands: tuple[str, ...] | None = None, injected=(), **change) -> FuzzCase:
    """A fixed sweep or uncertainty example: a variation base with top-level
    tables replaced (``sweep=[...]``, ``uncertainty={...}``) or dotted keys set
    (``time__step="10 ms"`` sets time.step; None removes the key)."""
    doc = copy.deepcopy(variation_documents()[base])
    for key, value in change.items():
        path = key.split("__")
        node = doc
        for part in path[:-1]:
            node = node.setdefault(part, {})
        if value is None:
            node.pop(path[-1], None)
        else:
            node[path[-1]] = value
    files = _series_files(doc)
    return FuzzCase(f"known:{name}", to_toml(doc), files, commands or _variation_commands(doc), tuple(injected), description=name)


def variation_known_cases() -> list[FuzzCase]:
    """Fixed examples for the sweep and uncertainty tables: the defects the
    first campaign on them found (docs/fuzz-findings.md), and inputs whose
    refusal or result is worth keeping an eye on."""
    long_key = "a." * 400 + "b"
    wool = {"name": "wool", "key": "layers.3.thickness", "values": ["40 mm", "80 mm"]}
    return [
        # a point's warning printed before another point's refusal: a refusal of two lines
        _vk("sweep-warning-then-refusal", "sweep-custom", ("check", "sweep"),
            sweep=[{"name": "wind", "key": "outside.wind_speed", "values": ["0 m/s", "1e6 m/s"]}]),
        # key paths echoed whole, and with control characters, in the message's key
        _vk("uncertainty-long-key", "unc-custom", ("check",), injected=[long_key],
            uncertainty={"samples": 8, "vary": {long_key: {"sd": "1 K"}}}),
        _vk("sweep-key-nul", "sweep-custom", ("check",), sweep=[dict(wool, key="layers.3.thickness\x00")]),
        _vk("uncertainty-key-nul", "unc-custom", ("check",),
            uncertainty={"samples": 8, "vary": {"outside.nope\x00": {"low": "1 mm", "high": "2 mm"}}}),
        # allowed sizes that take minutes (measured: 100,000 samples 141 s, 100,000 linear points 322 s)
        _vk("sweep-100000-points", "sweep-flux",
            sweep=[{"name": "q", "key": "inside.heat_flux", "range": {"from": "20 W/m2", "to": "50 W/m2", "count": 100000}}]),
        _vk("uncertainty-100000-samples", "unc-flux", uncertainty__samples=100000),
        _vk("uncertainty-10000-samples-stepping", "unc-weather", uncertainty__samples=10000),
        _vk("sweep-2000-nonlinear-points", "sweep-freeze",
            sweep=[{"name": "foam", "key": "layers.2.thickness", "values": [f"{10 + i * 0.01:.2f} mm" for i in range(2000)]}]),
        # 2.16 million nonlinear steps under the 60 million step limit (a plain run too)
        _vk("sweep-freeze-10-ms", "sweep-freeze", time__step="10 ms"),
        # one case key under two spellings: accepted, the second silently wins (the judge cannot see it)
        _vk("sweep-aliased-keys", "sweep-custom", ("check", "sweep"),
            sweep=[wool, {"name": "wool_b", "key": "layers.03.thickness", "values": ["10 mm", "300 mm"]}]),
        _vk("uncertainty-aliased-keys", "unc-custom", ("check", "run"),
            uncertainty={"samples": 16, "vary": {"layers.3.thickness": {"sd": "30 mm"}, "layers.03.thickness": {"low": "80 mm", "high": "81 mm"}}}),
        _vk("size-sized-layer-alias", "unc-pipe-size", ("size",),
            uncertainty={"samples": 16, "vary": {"layers.02.thickness": {"relative_sd": "5 %"}}}),
        # refused as they should be (kept as regression examples)
        _vk("size-sized-layer", "unc-pipe-size", ("check", "size"),
            uncertainty={"samples": 16, "vary": {"layers.2.thickness": {"relative_sd": "5 %"}}}),
        _vk("sweep-and-uncertainty", "sweep-custom", uncertainty={"samples": 8, "vary": {"outside.air_temperature": {"sd": "1 K"}}}),
        _vk("sweep-100001-points", "sweep-flux", ("check", "sweep"),
            sweep=[{"name": "q", "key": "inside.heat_flux", "range": {"from": "20 W/m2", "to": "50 W/m2", "count": 100001}}]),
        _vk("sweep-name-time", "sweep-custom", sweep=[dict(wool, name="time")]),
        _vk("sweep-time-start", "sweep-custom", sweep=[dict(wool, key="time.start", values=["2026-01-01T00:00", "2026-01-02T00:00"])]),
        _vk("sweep-item-non-ascii", "sweep-custom", sweep=[dict(wool, key="layers.\u0663.thickness")]),
        _vk("sweep-item-huge", "sweep-custom", sweep=[dict(wool, key="layers.99999999999999999999.thickness")]),
        _vk("sweep-key-names-table", "sweep-custom", sweep=[dict(wool, key="outside", values=["a", "b"])]),
        _vk("sweep-values-nan", "sweep-custom", sweep=[dict(wool, key="time.initial", values=[float("nan"), 10.0])]),
        # a generated cycle whose trough is below absolute zero (mean -270 degC, amplitude 5 K):
        # exit 3 where the outside air has a relative humidity (its dew point), archived otherwise
        _vk("sweep-one-point-below-0K", "sweep-wall", ("check", "sweep"),
            sweep=[{"name": "mean", "key": "series.cycles.t.mean", "values": ["5 degC", "-270 degC"]}]),
        _vk("sweep-one-point-below-0K-no-rh", "sweep-wall", ("check", "sweep"), outside__relative_humidity=None,
            sweep=[{"name": "mean", "key": "series.cycles.t.mean", "values": ["5 degC", "-270 degC"]}]),
        FuzzCase("known:cycle-trough-below-0K", to_toml(_small("wall", **{"series.cycles.t.mean": "-270 degC"})),
                 description="cycle-trough-below-0K"),
        FuzzCase("known:cycle-trough-below-0K-no-rh", to_toml(_small("wall", **{"series.cycles.t.mean": "-270 degC",
                                                                                 "outside.relative_humidity": None})),
                 description="cycle-trough-below-0K-no-rh"),
        _vk("sweep-boundary-kinds", "sweep-flux", sweep=[{"name": "side", "key": "outside.type", "values": ["adiabatic", "flux"]}]),
        _vk("sweep-geometry", "sweep-pipe-cells", sweep=[{"name": "shape", "key": "geometry.kind", "values": ["cylinder", "sphere"]}]),
        _vk("sweep-series-column-unit", "sweep-weather-sun",
            sweep=[{"name": "unit", "key": "series.columns.t_out.unit", "values": ["degC", "degF"]}]),
        _vk("uncertainty-samples-7", "unc-flux", ("check",), uncertainty__samples=7),
        _vk("uncertainty-tail-below-0K", "unc-custom", ("check", "run"),
            uncertainty={"samples": 64, "vary": {"outside.air_temperature": {"sd": "150 K"}}}),
        _vk("uncertainty-uniform-overflow", "unc-flux", uncertainty={"samples": 8, "vary": {"inside.heat_flux": {"low": -1e308, "high": 1e308}}}),
        _vk("uncertainty-every-quantity", "unc-wall-size", uncertainty={"samples": 8, "vary": {
            "layers.1.thickness": {"relative_sd": "1 %"},  # not layer 2: the one size sizes
            "layers.1.contact_resistance": {"relative_sd": "1 %"}, "inside.air_temperature": {"sd": "0.5 K"},
            "inside.surface_resistance": {"relative_sd": "1 %"}, "outside.surface_resistance": {"relative_sd": "1 %"},
            "outside.relative_humidity": {"relative_sd": "1 %"}, "mesh.max_cell": {"relative_sd": "1 %"},
            "series.cycles.t.mean": {"sd": "0.5 K"}, "series.cycles.t.amplitude": {"sd": "0.1 K"}}}),
        # the same, with one impossible spread: the refusal names the sampled value of every key
        _vk("uncertainty-many-keys-refused", "unc-wall-size", ("check",), uncertainty={"samples": 8, "vary": {
            "layers.1.thickness": {"relative_sd": "1 %"}, "layers.2.thickness": {"relative_sd": "1 %"},
            "layers.1.contact_resistance": {"relative_sd": "1 %"}, "inside.air_temperature": {"sd": "0.5 K"},
            "inside.surface_resistance": {"relative_sd": "1 %"}, "outside.surface_resistance": {"relative_sd": "1 %"},
            "outside.relative_humidity": {"relative_sd": "1 %"}, "mesh.max_cell": {"relative_sd": "1 %"},
            "series.cycles.t.mean": {"sd": "0.5 K"}, "series.cycles.t.amplitude": {"sd": "0.1 K"},
            "mesh.growth": {"low": 0.1, "high": 0.2}}}),
    ]


#: Sweeps or samples of more runs than this are tried with ``layers check`` only
#: in the seeded campaign: a grid of 100,000 points or 100,000 samples is allowed
#: and takes minutes by design (fixed examples of that class are in
#: :func:`variation_known_cases`).
MAX_SEEDED_RUNS = 1000


def _runs_asked(doc: dict) -> int:
    """How many runs a sweep or uncertainty document asks for (0 where it cannot tell)."""
    runs = 1
    if isinstance(doc.get("sweep"), list):
        for t in doc["sweep"]:
            if not isinstance(t, dict):
                return 0
            values, rng = t.get("values"), t.get("range")
            if isinstance(values, list):
                runs *= max(len(values), 1)
            elif isinstance(rng, dict) and isinstance(rng.get("count"), int):
                runs *= max(rng["count"], 1)
    samples = doc.get("uncertainty", {}).get("samples") if isinstance(doc.get("uncertainty"), dict) else None
    if isinstance(samples, (int, float)) and not isinstance(samples, bool) and math.isfinite(samples):
        runs *= int(samples)
    return runs


def variation_campaign(seed: int, count: int) -> list[FuzzCase]:
    """``count`` seeded mutations of the sweep and uncertainty bases, spread evenly over them."""
    bases = variation_documents()
    names = sorted(bases)
    out = []
    for i in range(count):
        rng = random.Random(seed * 2_000_003 + i)
        name = names[i % len(names)]
        case = mutate_variation(name, bases[name], _series_files(bases[name]), rng)
        case.name = f"v{seed}-{i:04d}:{case.name}"
        out.append(case)
    return out


# --------------------------------------------------------------------------
# Running and judging


@dataclass
class Outcome:
    verdict: str  # one of SEVERITY
    detail: str
    command: str = ""
    seconds: float = 0.0
    stderr: str = ""
    exit: int | None = None


def _limit_memory() -> None:  # runs in the child before exec
    resource.setrlimit(resource.RLIMIT_AS, (MEMORY_LIMIT, MEMORY_LIMIT))


def _env(work: Path) -> dict[str, str]:
    env = dict(os.environ)
    env.pop("LAYERS_DEBUG", None)
    env.update(
        LAYERS_ARCHIVE=str(work / "default-archive"),
        LAYERS_CACHE_DIR=str(work / "cache"),
        MPLCONFIGDIR=str(work / "mpl"),
        PYTHONPATH=os.environ.get("LAYERS_FUZZ_SOURCE", str(ROOT)) + os.pathsep + env.get("PYTHONPATH", ""),
        OPENBLAS_NUM_THREADS="1", OMP_NUM_THREADS="1", MKL_NUM_THREADS="1", MALLOC_ARENA_MAX="2",
        PYTHONWARNINGS="", COLUMNS="100",
    )
    return env


def _layers(args: list[str], work: Path, timeout: float) -> tuple[int | None, str, str, float]:
    t0 = time.monotonic()
    try:
        p = subprocess.run([sys.executable, "-m", "layers.cli", *args], cwd=work, env=_env(work), capture_output=True,
                           timeout=timeout, preexec_fn=_limit_memory, stdin=subprocess.DEVNULL)
        return p.returncode, p.stdout.decode("utf-8", "replace"), p.stderr.decode("utf-8", "replace"), time.monotonic() - t0
    except subprocess.TimeoutExpired as exc:
        err = (exc.stderr or b"").decode("utf-8", "replace")
        return None, "", err, time.monotonic() - t0


def _archived(folder: Path) -> list[Path]:
    return sorted(p for p in folder.rglob("*") if p.is_file()) if folder.exists() else []


_NETCDF_LOCK = threading.Lock()  # the netCDF/HDF5 libraries are not thread-safe


def dataset_problem(path: Path, case_text: str = "") -> str | None:
    """Why an archived run is not physically sound, or None."""
    with _NETCDF_LOCK:
        return _dataset_problem(path, expected_start(case_text))


def expected_start(case_text: str):
    """The UTC start a case asks for, where Python's datetime can say it (else None)."""
    import datetime as dt

    try:
        doc = tomllib.loads(case_text)
        start = doc.get("time", {}).get("start")
        if isinstance(start, str):
            start = dt.datetime.fromisoformat(start)
        if isinstance(start, dt.date) and not isinstance(start, dt.datetime):
            start = dt.datetime(start.year, start.month, start.day)
        if not isinstance(start, dt.datetime):
            return None
        if start.tzinfo is None:
            zone = doc.get("series", {}).get("timezone", "UTC") if "series" in doc else "UTC"
            if zone in ("UTC", "utc", "Z"):
                return start
            m = re.fullmatch(r"([+-])(\d\d):(\d\d)", str(zone))
            if not m:
                return None
            sign = 1 if m.group(1) == "+" else -1
            return start - sign * dt.timedelta(hours=int(m.group(2)), minutes=int(m.group(3)))
        return start.astimezone(dt.timezone.utc).replace(tzinfo=None)
    except Exception:  # noqa: BLE001 - a case the program must refuse anyway
        return None


def _time_problem(var, start) -> str | None:
    import datetime as dt

    import numpy as np

    values = np.asarray(var.values, dtype=float)
    if values.size and not (np.isfinite(values).all() and (np.diff(values) > 0).all()):
        return "time: not finite and increasing"
    m = re.fullmatch(r"(\w+) since (.+)", str(var.attrs.get("units", "")))
    if start is None or not m or not values.size or m.group(1) not in ("seconds", "minutes", "hours", "days"):
        return None
    try:
        origin = dt.datetime.fromisoformat(m.group(2).strip().replace(" ", "T").rstrip("Z"))
        first = origin.replace(tzinfo=None) + dt.timedelta(**{m.group(1): float(values[0])})
    except (ValueError, OverflowError) as exc:
        return f"time: cannot be read ({exc})"
    if abs((first - start).total_seconds()) > 1.0:
        return f"time[0] is {first.isoformat()} but the case starts at {start.isoformat()} UTC"
    return None


def _dataset_problem(path: Path, start=None) -> str | None:
    import numpy as np
    import xarray as xr

    try:
        ds = xr.open_dataset(path, decode_times=False)
    except Exception as exc:  # noqa: BLE001
        return f"archived file does not open: {type(exc).__name__}: {str(exc)[:80]}"
    with ds:
        product = str(ds.attrs.get("product", "run"))
        if product == "sweep":
            return _sweep_problem(ds, start)
        if product == "sizing":
            if "surface_temperature_outside" not in ds:
                return "sizing file has no surface_temperature_outside"
        elif "temperature" not in ds:
            return "archived file has no temperature"
        if "time" in ds.variables and (problem := _time_problem(ds["time"], start)):
            return problem
        for name, var in ds.variables.items():
            if var.dtype.kind != "f":
                continue
            if (problem := _values_problem(name, var, np.asarray(var.values, dtype=float))) is not None:
                return problem
    return None


def _is_temperature(name: str, var) -> bool:
    units = str(var.attrs.get("units", ""))
    return units in ("degC", "degree_Celsius", "Celsius", "K") or name.startswith(
        ("temperature", "surface_temperature", "interface_temperature", "contents_temperature"))


def _values_problem(name: str, var, values, padded=None) -> str | None:
    """Why one variable's values are not physical, or None.  ``padded``: a mask
    of values that are legitimately NaN (a sweep's padding), or None."""
    import numpy as np

    units = str(var.attrs.get("units", ""))
    if _is_temperature(name, var):
        bad = ~np.isfinite(values)
        if name.startswith("air_temperature") or "dew_point" in name:
            bad = np.zeros_like(bad)  # a missing drive may legitimately be absent
        if padded is not None:
            bad &= ~padded
        if bad.any():
            return f"{name}: {int(bad.sum())} of {values.size} values not finite"
        floor = 0.0 if units == "K" else ABSOLUTE_ZERO_C
        finite = values[np.isfinite(values)]
        if finite.size and finite.min() < floor - 1e-9:
            return f"{name}: minimum {finite.min():.6g} {units} is below absolute zero"
    elif name in ("x", "time", "stored_energy") or name.startswith("heat_flow"):
        bad = ~np.isfinite(values)
        if padded is not None:
            bad &= ~padded
        if bad.any():
            return f"{name}: values not finite"
    elif name.startswith("probability_"):
        if not (np.isfinite(values).all() and (values >= 0).all() and (values <= 1).all()):
            return f"{name}: not a share from 0 to 1"
    return None


def _sweep_problem(ds, start=None) -> str | None:
    """Why an archived sweep is not physically sound, or None.

    A sweep file holds each run variable with the sweep dimensions in front
    (or once, where every point agrees).  NaN is padding, not a defect, in two
    places only: ``temperature`` (and ``x``) on a ``cell`` axis beyond a
    point's own cells (a trailing block of cells, NaN at every time, where
    ``x`` is NaN too), and ``sol_air_temperature_*`` of a point without sun
    (NaN at every time of that point).  Anything else non-finite, and any value
    below absolute zero, is unsound; ``surface_temperature_*`` never pads.
    Numeric sweep coordinates must be finite."""
    import numpy as np

    for name in ("surface_temperature_inside", "surface_temperature_outside"):
        if name not in ds:
            return f"sweep file has no {name}"
    sweep_dims = tuple(d for d in ds["surface_temperature_outside"].dims if d != "time")
    for d in sweep_dims:
        if d in ds.coords and ds[d].dtype.kind == "f" and not np.isfinite(ds[d].values).all():
            return f"sweep coordinate {d}: values not finite"
    if "time" in ds.variables and (problem := _time_problem(ds["time"], start)):
        return problem
    cell_pad = None
    if "temperature" in ds and "cell" in ds["temperature"].dims:
        t = ds["temperature"]
        values = np.asarray(t.values, dtype=float)
        axis_t = t.dims.index("time")
        nan = ~np.isfinite(values)
        pad = nan.all(axis=axis_t)  # (sweep dims..., cell): cells missing at every time
        order = [d for d in t.dims if d != "time"]
        if not (nan == np.expand_dims(pad, axis_t)).all():
            return "temperature: NaN inside a point's cells (not padding)"
        pad_c = np.moveaxis(pad, order.index("cell"), -1)
        if (pad_c[..., :-1] & ~pad_c[..., 1:]).any():
            return "temperature: NaN cells before a point's last cell (padding must trail)"
        if pad_c.all(axis=-1).any():
            return "temperature: a point with no finite cell"
        if "x" in ds.variables and "cell" in ds["x"].dims:
            x = ds["x"]
            x_nan = np.moveaxis(~np.isfinite(np.asarray(x.values, dtype=float)), x.dims.index("cell"), -1)
            if x_nan.shape != pad_c.shape or (x_nan != pad_c).any():
                return "x: NaN cells differ from the padding of temperature"
            cell_pad = x_nan
    for name, var in ds.variables.items():
        if var.dtype.kind != "f" or name == "time":
            continue
        values = np.asarray(var.values, dtype=float)
        padded = None
        if "cell" in var.dims and name in ("temperature", "x"):
            pad = np.isnan(values)  # its shape and placement were checked above
            padded = pad if cell_pad is not None or name == "temperature" else None
        elif name.startswith("sol_air_temperature") and "time" in var.dims:
            nan = ~np.isfinite(values)
            padded = np.broadcast_to(np.expand_dims(nan.all(axis=var.dims.index("time")), var.dims.index("time")), values.shape)
        if (problem := _values_problem(name, var, values, padded)) is not None:
            return problem
    return None


def _echo_of(message: str, injected: tuple[str, ...]) -> str | None:
    for s in injected:
        if len(s) <= ECHO_LIMIT:
            continue
        for i in range(0, len(s) - ECHO_LIMIT):
            if s[i:i + ECHO_LIMIT + 1] in message:
                return f"echoes more than {ECHO_LIMIT} characters of the input"
    return None


def classify(code: int | None, stderr: str, new_files: list[Path], case: FuzzCase, wrote_run: bool) -> tuple[str, str]:
    """(verdict, detail) for one command."""
    injected = case.injected
    lines = [line for line in stderr.splitlines() if line.strip()]
    errors = [line for line in lines if not line.startswith("layers: warning: ")]
    first = (errors or lines or [""])[-1][:200]
    if code is None:
        return "hang", f"no answer within the time limit; stderr: {first!r}"
    if "MemoryError" in stderr or code in (-9, 137):
        return "hang", f"out of memory under the {MEMORY_LIMIT >> 30} GB limit (exit {code}): {first!r}"
    if code not in (0, 1, 2) or "Traceback" in stderr:
        return "crash", f"exit {code}: {first!r}"
    if code != 0:
        if new_files:
            return "unsound", f"refused (exit {code}) but left {', '.join(p.name for p in new_files)} in the archive"
        if len(lines) != 1 or not lines[0].startswith("layers: "):
            return "bad-message", f"refusal of {len(lines)} lines: {' | '.join(line[:100] for line in lines[:3])!r}"
        line = lines[0]
        if (echo := _echo_of(line, injected)) or len(line) > LINE_LIMIT:
            return "bad-message", f"{echo or f'line of {len(line)} characters'}: {line[:120]!r}"
        if any(not ch.isprintable() for ch in line):
            return "bad-message", f"unprintable characters in the message: {line[:120]!r}"
        if case.hint and case.hint not in line:
            return "bad-message", f"no hint {case.hint!r}: {line[:120]!r}"
        return "refused", line[:200]
    if wrote_run and len(new_files) != 1:
        return "unsound", f"exit 0 but {len(new_files)} files archived"
    for f in new_files:
        if (problem := dataset_problem(f, case.text)) is not None:
            return "unsound", f"exit 0 and archived {problem}"
    leaked = [line for line in lines if any(w in line for w in NUMPY_WARNINGS)]
    if leaked:
        return "bad-message", f"exit 0 with a raw numerical warning: {leaked[0][:120]!r}"
    if any(not line.startswith("layers: warning: ") for line in lines):
        return "bad-message", f"exit 0 with stray stderr: {lines[0][:120]!r}"
    return "sound", "exit 0" + (f", {len(lines)} warning line(s)" if lines else "")


def _worst(outcomes: list[Outcome]) -> Outcome:
    return min(outcomes, key=lambda o: SEVERITY.index(o.verdict))


def run_case(case: FuzzCase, work: Path, timeout: float = 20.0) -> Outcome:
    """Run every command of ``case`` in ``work`` (created) and return the worst outcome."""
    work.mkdir(parents=True, exist_ok=True)
    (work / "case.toml").write_text(case.text, encoding="utf-8")
    for name, data in case.files.items():
        (work / name).write_bytes(data)
    archive = work / "archive"
    outcomes = []
    for command in case.commands:
        if command in ("check", "run", "sweep", "size"):
            before = set(_archived(archive)) | set(_archived(work / "default-archive"))
            args = ["check", "case.toml"] if command == "check" else [command, "case.toml", "--archive", str(archive), "--quiet"]
            code, out, err, secs = _layers(args, work, timeout)
            after = set(_archived(archive)) | set(_archived(work / "default-archive"))
            new = sorted(after - before)
            if command == "size" and code == 1 and _no_candidate_passes(out, err):
                code = 0  # exit 1 is size's answer "no candidate passes" (a result, archived), not a refusal
            if command == "check" and code == 0 and new:
                verdict, detail = "unsound", "check archived a file"
            else:
                verdict, detail = classify(code, err, new, case, command != "check")
            if verdict == "hang" and code is None and command != "check":
                predicted = _predicted_seconds(work, timeout)
                if predicted is not None and predicted * ESTIMATE_FACTOR >= timeout:
                    verdict, detail = "long", f"over the {timeout:g} s limit, as `layers check` predicted (about {predicted:.3g} s)"
            outcomes.append(Outcome(verdict, detail, command, secs, err, code))
        else:
            outcomes.append(_special(command, case, work, timeout))
        if outcomes[-1].verdict in ("unsound", "hang", "crash"):
            break  # the worst is known; the next command would only repeat it
    return _worst(outcomes)


def _predicted_seconds(work: Path, timeout: float) -> float | None:
    """How long ``layers check`` said the case's work takes [s] (its ``work`` line), or None."""
    import re

    code, out, _, _ = _layers(["check", "case.toml"], work, timeout)
    if code != 0:
        return None
    for line in out.splitlines():
        if line.startswith("work:"):
            if "under a second" in line:
                return 0.5
            m = re.search(r"roughly ([0-9.]+(?:e[+-]?[0-9]+)?) (s|min|h)\b", line)
            if m:
                return float(m.group(1)) * {"s": 1.0, "min": 60.0, "h": 3600.0}[m.group(2)]
    return None


def _no_candidate_passes(stdout: str, stderr: str) -> bool:
    """``layers size`` exits 1 when no candidate meets every criterion: an
    answer (printed on stdout, the sizing archived), with nothing but warnings
    on stderr."""
    quiet = all(line.startswith("layers: warning: ") for line in stderr.splitlines() if line.strip())
    return quiet and "no candidate thickness meets every criterion" in stdout


def _prepare_run(work: Path, timeout: float) -> Path:
    """A sound archived run of case.toml in work/seed-archive, for the special scenarios."""
    seed = work / "seed-archive"
    code, _out, err, _secs = _layers(["run", "case.toml", "--archive", str(seed), "--quiet"], work, timeout)
    files = _archived(seed)
    if code != 0 or len(files) != 1:
        raise RuntimeError(f"the seed run failed (exit {code}): {err[:200]}")
    return files[0]


def _special(command: str, case: FuzzCase, work: Path, timeout: float) -> Outcome:
    archive = work / "archive"
    if command == "run-archive-file":
        target = work / "not-a-folder.nc"
        target.write_bytes(b"not a folder")
        args, watch = ["run", "case.toml", "--archive", str(target), "--quiet"], work / "none"
    elif command == "run-archive-readonly":
        archive.mkdir()
        archive.chmod(0o555)
        args, watch = ["run", "case.toml", "--archive", str(archive), "--quiet"], archive
    elif command == "list-corrupt-cache":
        run = _prepare_run(work, timeout)
        code, _o, err, _s = _layers(["list", str(run.parent)], work, timeout)
        for f in _archived(work / "cache"):
            f.write_bytes(b"\x00\xff{not json" * 7)
        args, watch = ["list", str(run.parent)], work / "none"
    elif command == "compare-all-nan":
        run = _prepare_run(work, timeout)
        with _NETCDF_LOCK:
            runs = _all_nan_copies(run, work)
        args, watch = ["compare", *runs], work / "none"
    elif command == "again-bit-flipped":
        run = _prepare_run(work, timeout)
        data = bytearray(run.read_bytes())
        rng = random.Random(7)
        for _ in range(64):
            i = rng.randrange(len(data) // 4, len(data))
            data[i] ^= 1 << rng.randrange(8)
        flipped = work / "flipped.nc"
        flipped.write_bytes(bytes(data))
        args, watch = ["run", "--again", str(flipped), "--archive", str(archive), "--quiet"], archive
    else:
        raise ValueError(command)
    before = set(_archived(watch))
    code, _out, err, secs = _layers(args, work, timeout)
    new = sorted(set(_archived(watch)) - before)
    verdict, detail = classify(code, err, new, case, wrote_run=watch == archive and code == 0)
    return Outcome(verdict, detail, command, secs, err, code)


def _all_nan_copies(run: Path, work: Path) -> list[str]:
    import numpy as np
    import xarray as xr

    with xr.open_dataset(run) as ds:
        ds = ds.load()
    for name in ds.data_vars:
        if ds[name].dtype.kind == "f":
            ds[name].values[...] = np.nan
    runs = []
    for i in (1, 2):
        out = work / f"nan-{i}.nc"
        ds.to_netcdf(out)
        runs.append(str(out))
    return runs


def run_many(cases: list[FuzzCase], root: Path, timeout: float = 20.0, workers: int = 2) -> dict[str, Outcome]:
    """Run cases in parallel (each in its own folder under ``root``); outcomes by case id."""
    from concurrent.futures import ThreadPoolExecutor

    def one(item):
        i, case = item
        work = root / f"{i:04d}"
        try:
            return case.id, run_case(case, work, timeout)
        finally:
            for p in (work / "archive",):
                if p.exists():
                    p.chmod(0o755)
            shutil.rmtree(work, ignore_errors=True)

    with ThreadPoolExecutor(max_workers=workers) as pool:
        return dict(pool.map(one, enumerate(cases)))
