"""Mutated case files for the fuzz tests, and the judge of what the command
line did with them.

A :class:`FuzzCase` is a case text plus the files it names (a series CSV) and
the command lines to try.  :func:`run_case` runs each command in a fresh
Python process with a time limit and a memory limit, the archive and the list
cache in a private folder, and :func:`classify` sorts the outcome:

* ``refused``  exit 1/2 with exactly one stderr line starting ``layers:``
* ``sound``    exit 0 and every archived file has finite temperatures above
               absolute zero (``check`` archives nothing and must not)
* ``crash``    exit 3, any other status, or a traceback
* ``hang``     over the time limit, or out of memory under the memory limit
* ``unsound``  exit 0 with non-finite or below-absolute-zero values archived,
               or a file left in the archive by a refused command
* ``bad-message``  a refusal of more than one line, an echo of more than
               80 characters of the input, or a raw numpy warning

Cases come from three sources: the demo cases in ``cases/`` (shortened so a
run takes about a second), small cases written here, and fixed reproductions
of the defect classes the project knows about (:func:`known_cases`).
:func:`campaign` draws seeded mutations of the first two.
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
SEVERITY = ["unsound", "hang", "crash", "bad-message", "refused", "sound"]
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
        out.append(case)
    return out


def base_cases() -> list[FuzzCase]:
    """The unmutated bases: each must run soundly (a check of the harness itself)."""
    bases = base_documents()
    return [FuzzCase(f"base:{n}", to_toml(d), _series_files(d)) for n, d in sorted(bases.items())]


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
        if "temperature" not in ds:
            return "archived file has no temperature"
        if "time" in ds.variables and (problem := _time_problem(ds["time"], start)):
            return problem
        for name, var in ds.variables.items():
            if var.dtype.kind != "f":
                continue
            units = str(var.attrs.get("units", ""))
            values = np.asarray(var.values, dtype=float)
            if units in ("degC", "degree_Celsius", "Celsius", "K") or name.startswith(("temperature", "surface_temperature", "interface_temperature", "contents_temperature")):
                bad = ~np.isfinite(values)
                if name.startswith("air_temperature") or "dew_point" in name:
                    bad = np.zeros_like(bad)  # a missing drive may legitimately be absent
                if bad.any():
                    return f"{name}: {int(bad.sum())} of {values.size} values not finite"
                floor = 0.0 if units == "K" else ABSOLUTE_ZERO_C
                finite = values[np.isfinite(values)]
                if finite.size and finite.min() < floor - 1e-9:
                    return f"{name}: minimum {finite.min():.6g} {units} is below absolute zero"
            elif name in ("x", "time", "stored_energy") or name.startswith("heat_flow"):
                if not np.isfinite(values).all():
                    return f"{name}: values not finite"
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
        if command in ("check", "run"):
            before = set(_archived(archive)) | set(_archived(work / "default-archive"))
            args = ["check", "case.toml"] if command == "check" else ["run", "case.toml", "--archive", str(archive), "--quiet"]
            code, _out, err, secs = _layers(args, work, timeout)
            after = set(_archived(archive)) | set(_archived(work / "default-archive"))
            new = sorted(after - before)
            if command == "check" and code == 0 and new:
                verdict, detail = "unsound", "check archived a file"
            else:
                verdict, detail = classify(code, err, new, case, command == "run")
            outcomes.append(Outcome(verdict, detail, command, secs, err, code))
        else:
            outcomes.append(_special(command, case, work, timeout))
        if outcomes[-1].verdict in ("unsound", "hang", "crash"):
            break  # the worst is known; the next command would only repeat it
    return _worst(outcomes)


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
