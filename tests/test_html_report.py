"""``layers report``: the client report page (layers/html_report.py).

Each expected value is read from the result file itself with xarray (the
source of every figure the page shows), or from the SPEC for the
condensation dataset, which is built here by hand; the page must show it,
formatted as the report writes numbers (fixed decimals or four significant
digits, a true minus sign, units as ``°C``, ``W/m²``).  The pages are made
once per module through the command line (``layers.cli.main``).
"""

from __future__ import annotations

import hashlib
import html
import math
import re
import shutil
import subprocess
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

from layers.about import CAUTION
from layers.cli import main

ROOT = Path(__file__).resolve().parents[1]
CASES = ROOT / "cases"

# --------------------------------------------------------------------------- #
# a strict well-formedness check on top of html.parser

#: HTML void elements (WHATWG HTML, "void elements"): no content, no end tag.
VOID = {"area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta", "source", "track", "wbr"}


class StrictPage(HTMLParser):
    """Parses a page and records every breach of strict nesting: an end tag that
    does not close the innermost open element, an end tag or a self-closing
    form on a void element misused, an element left open, a duplicated
    attribute; it also collects every resource reference (src, href, url())."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.stack: list[tuple[str, tuple[int, int]]] = []
        self.errors: list[str] = []
        self.references: list[str] = []
        self.tags: set[str] = set()
        self.doctype = False
        self._style = False
        self.text: list[str] = []

    def handle_decl(self, decl: str) -> None:
        self.doctype = self.doctype or decl.lower() == "doctype html"

    def _attrs(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        names = [n for n, _ in attrs]
        if len(names) != len(set(names)):
            self.errors.append(f"duplicated attribute in <{tag}> at {self.getpos()}")
        for name, value in attrs:
            if name in ("src", "href", "srcset", "poster", "data", "action", "xlink:href") and value is not None:
                self.references.append(value)
            if name == "style" and value:
                self.references += re.findall(r"url\(\s*['\"]?([^'\")]*)", value)

    def handle_starttag(self, tag: str, attrs) -> None:
        self.tags.add(tag)
        self._attrs(tag, attrs)
        if tag == "style":
            self._style = True
        if tag not in VOID:
            self.stack.append((tag, self.getpos()))

    def handle_startendtag(self, tag: str, attrs) -> None:
        self.tags.add(tag)
        self._attrs(tag, attrs)
        if tag not in VOID:
            self.errors.append(f"self-closing <{tag}/> is not a void element, at {self.getpos()}")

    def handle_endtag(self, tag: str) -> None:
        if tag in VOID:
            self.errors.append(f"end tag </{tag}> of a void element at {self.getpos()}")
            return
        if tag == "style":
            self._style = False
        if not self.stack or self.stack[-1][0] != tag:
            open_tag = self.stack[-1] if self.stack else None
            self.errors.append(f"</{tag}> at {self.getpos()} does not close the innermost open element {open_tag}")
            return
        self.stack.pop()

    def handle_data(self, data: str) -> None:
        if self._style:
            self.references += re.findall(r"url\(\s*['\"]?([^'\")]*)", data)
            self.references += re.findall(r"@import\s+['\"]([^'\"]+)", data)
        else:
            self.text.append(data)

    def check(self, page: str) -> StrictPage:
        self.feed(page)
        self.close()
        if self.stack:
            self.errors.append(f"elements left open: {self.stack}")
        if not self.doctype:
            self.errors.append("no <!DOCTYPE html>")
        return self


def strict(page: str) -> StrictPage:
    parsed = StrictPage().check(page)
    assert not parsed.errors, parsed.errors[:5]
    return parsed


def test_the_strict_check_catches_what_it_should():
    """The checker itself must fail on broken pages, else the page tests prove nothing."""
    good = "<!DOCTYPE html><html><head><title>t</title></head><body><p>a<br>b</p><img src='data:,x' alt=''></body></html>"
    assert not StrictPage().check(good).errors
    for broken in (
        "<!DOCTYPE html><html><body><p><b>x</p></b></body></html>",        # crossed
        "<!DOCTYPE html><html><body><div>x</body></html>",                 # left open
        "<!DOCTYPE html><html><body><img src='data:,x'></img></body></html>",  # end tag of a void element
        "<!DOCTYPE html><html><body><div/></body></html>",                 # self-closing non-void
        "<html><body></body></html>",                                      # no doctype
    ):
        assert StrictPage().check(broken).errors, broken


# --------------------------------------------------------------------------- #
# the result files, made once


def _cli(*args: str) -> int:
    return main([str(a) for a in args])


def _condensation_dataset(case_text: str) -> xr.Dataset:
    """A condensation result shaped as SPEC.md says ``layers condensation`` writes
    it: dims ``month`` (1-12) and ``interface``; ``condensation_rate``
    (kg m-2 s-1, positive condensing), ``accumulated_moisture`` (kg m-2, at the
    end of each month), ``vapour_pressure`` and ``saturation_vapour_pressure``
    (Pa); attributes ``first_month`` and ``verdict``.  The numbers are invented
    for the test (not measured, not computed by any standard's method): moisture
    condenses at interface 2 from November to February and dries by May."""
    months = np.arange(1, 13)
    seconds = np.array([31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31]) * 86400.0
    rate = np.zeros((12, 5))
    rate[[10, 11, 0, 1], 2] = [2e-8, 6e-8, 8e-8, 4e-8]        # Nov .. Feb condensing
    rate[[2, 3, 4], 2] = [-6e-8, -8e-8, -9e-8]                 # Mar .. May drying
    acc = np.zeros((12, 5))
    held = 0.0
    for m in [10, 11, 0, 1, 2, 3, 4, 5, 6, 7, 8, 9]:           # from November, the first month
        held = max(0.0, held + rate[m, 2] * seconds[m])
        acc[m, 2] = held
    p_sat = np.tile([2337.0, 2100.0, 700.0, 610.0, 600.0], (12, 1))
    p = np.tile([1170.0, 1100.0, 700.0, 560.0, 520.0], (12, 1))
    ds = xr.Dataset(
        {
            "condensation_rate": (("month", "interface"), rate, {"units": "kg m-2 s-1", "long_name": "condensation rate"}),
            "accumulated_moisture": (("month", "interface"), acc, {"units": "kg m-2", "long_name": "accumulated moisture"}),
            "vapour_pressure": (("month", "interface"), p, {"units": "Pa", "long_name": "vapour pressure"}),
            "saturation_vapour_pressure": (("month", "interface"), p_sat, {"units": "Pa", "long_name": "saturation vapour pressure"}),
        },
        coords={"month": ("month", months), "interface": ("interface", np.arange(5)),
                "layer_interface": ("interface", np.array([0.0, 0.015, 0.255, 0.375, 0.385]), {"units": "m"})},
    )
    ds.attrs = {
        "title": "Synthetic condensation check (test data)",
        "product": "condensation",
        "first_month": 11,
        "verdict": "dries out within the year",
        "case": case_text,
        "case_sha256": hashlib.sha256(case_text.encode("utf-8")).hexdigest(),
        "software_version": "0.1.0",
        "created": "2026-01-01T00:00:00Z",
        "geometry": "planar",
        "caution": CAUTION,
    }
    return ds


@pytest.fixture(scope="module")
def results(tmp_path_factory):
    """One file of each kind (the demo cases; a hand-made condensation dataset)."""
    folder = tmp_path_factory.mktemp("results")
    archive = folder / "archive"
    files = {
        "run": folder / "wall.nc",
        "run2": folder / "wall-160.nc",
        "sizing": folder / "size.nc",
        "periodic": folder / "periodic.nc",
        "sweep": folder / "sweep.nc",
        "condensation": folder / "condensation.nc",
    }
    assert _cli("run", CASES / "masonry-wall-hot-week.toml", "-o", files["run"], "--archive", archive, "-q") == 0
    # the same wall with 160 mm of mineral wool instead of 120 mm: a run comparable with the first
    text = (CASES / "masonry-wall-hot-week.toml").read_text(encoding="utf-8")
    assert 'thickness = "120 mm"' in text
    variant = folder / "wall-160.toml"
    variant.write_text(text.replace('thickness = "120 mm"', 'thickness = "160 mm"'), encoding="utf-8")
    assert _cli("run", variant, "-o", files["run2"], "--archive", archive, "-q") == 0
    assert _cli("size", CASES / "hot-oil-line-touch.toml", "-o", files["sizing"], "--archive", archive, "-q") == 0
    assert _cli("periodic", CASES / "masonry-wall-hot-week.toml", "-o", files["periodic"]) == 0
    assert _cli("sweep", CASES / "wool-grid.toml", "-o", files["sweep"], "--archive", archive, "-q") == 0
    text = (CASES / "masonry-wall-hot-week.toml").read_text(encoding="utf-8")
    _condensation_dataset(text).to_netcdf(files["condensation"])
    return files


PAGES = {
    "run": ("run",),
    "sizing": ("sizing",),
    "periodic": ("periodic",),
    "sweep": ("sweep",),
    "condensation": ("condensation",),
    "two runs": ("run", "run2"),
    "run and sizing": ("run", "sizing"),
}


@pytest.fixture(scope="module")
def pages(results, tmp_path_factory):
    """The report page of each kind, written by ``layers report -o``."""
    folder = tmp_path_factory.mktemp("pages")
    out = {}
    for name, keys in PAGES.items():
        path = folder / f"{name.replace(' ', '-')}.html"
        assert _cli("report", *(results[k] for k in keys), "-o", path) == 0
        out[name] = path
    return out


def _text(page: str) -> str:
    """The page as a reader sees its characters (entities resolved)."""
    return html.unescape(page)


def _n(value: float, spec: str) -> str:
    """A number as the report writes it: Python format, a true minus sign."""
    text = format(float(value), spec)
    return text.replace("-", "\u2212") if text.startswith("-") else text


# --------------------------------------------------------------------------- #
# every kind: well formed, self-contained, the key figures, caution and hash


@pytest.mark.parametrize("name", list(PAGES))
def test_page_is_strict_html_and_self_contained(pages, name):
    page = pages[name].read_text(encoding="utf-8")
    parsed = strict(page)
    assert not {"script", "link", "iframe", "object", "embed", "base"} & parsed.tags
    for ref in parsed.references:
        assert ref.startswith(("data:image/png;base64,", "#")), ref
    assert not re.search(r"(src|href)\s*=\s*['\"]?\s*(https?:)?//", page, re.I)
    assert not re.search(r"url\(\s*['\"]?\s*(https?:)?//", page, re.I)
    assert "@page" in page and "A4" in page


@pytest.mark.parametrize("name", list(PAGES))
def test_page_carries_caution_and_provenance(pages, results, name):
    text = _text(pages[name].read_text(encoding="utf-8"))
    for key in PAGES[name]:
        with xr.open_dataset(results[key]) as ds:
            attrs = dict(ds.attrs)
        assert " ".join(str(attrs["caution"]).split()) in " ".join(text.split()) or CAUTION in text
        assert attrs["case_sha256"] in text
        assert attrs["software_version"] in text
        assert results[key].name in text
        assert str(results[key].parent) not in text  # the base name only, never the folder
    assert "local building, energy and safety codes" in text


def test_run_key_figures(pages, results):
    """Extremes from the variables, the mean heat flow from the run's own total
    over its duration (the SPEC: totals are summed from the scheme's fluxes)."""
    text = _text(pages["run"].read_text(encoding="utf-8"))
    with xr.open_dataset(results["run"]) as ds:
        out = ds["surface_temperature_outside"].values
        ins = ds["surface_temperature_inside"].values
        seconds = float((ds["time"].values[-1] - ds["time"].values[0]) / np.timedelta64(1, "s"))
        mean = float(ds.attrs["heat_in_inside_total"]) / seconds
        title, scheme, step = ds.attrs["title"], ds.attrs["scheme"], float(ds.attrs["time_step"])
        air_out = ds["air_temperature_outside"].values
    assert f"{_n(out.max(), '.2f')} °C" in text
    assert f"{_n(out.min(), '.2f')} °C" in text
    assert f"{_n(ins.max(), '.2f')} °C" in text
    assert f"{_n(mean, '.4g')} W/m²" in text
    assert title in text
    assert scheme.upper() in text.upper()
    assert f"time step {step / 60:g} min" in text
    # the climate series: minimum and maximum of the outside air
    assert f"{_n(air_out.min(), '.4g')} °C" in text and f"{_n(air_out.max(), '.4g')} °C" in text
    # the layer table from the case text: every material and thickness of masonry-wall-hot-week.toml
    for material, mm in (("gypsum-plaster", "15.0"), ("brick", "240.0"), ("mineral-wool", "120.0"), ("cement-sand-render", "10.0")):
        assert material in text and mm in text
    assert text.count("data:image/png;base64,") >= 3  # surfaces, profiles, carpet


def test_sizing_criteria_pass_and_fail(pages, results):
    text = _text(pages["sizing"].read_text(encoding="utf-8"))
    page = pages["sizing"].read_text(encoding="utf-8")
    with xr.open_dataset(results["sizing"]) as ds:
        rec = float(ds.attrs["recommended_thickness"])
        limit = float(ds.attrs["max_surface_temperature"])
        budget = float(ds.attrs["max_heat_loss"])
        thick = ds["thickness"].values
        passes = ds["passes_all"].values
        surface = ds["surface_temperature_outside"].values
    assert f"Recommended thickness: {rec * 1000:g} mm" in text
    assert f"{limit:.2f} °C" in text and f"{budget:.4g} W/m" in text
    for d, s in zip(thick, surface):
        assert f"{d * 1000:.1f}" in text and f"{s:.2f}" in text
    # one "all" verdict cell per candidate, failing exactly where passes_all is false
    verdicts = re.findall(r'<td class="(pass|fail)">(pass|FAIL)</td>', page)
    assert [v for _, v in verdicts] == ["pass" if p else "FAIL" for p in passes]
    assert "ISO 13732-1" in text  # the touch caution of layers.sizing


def test_periodic_characteristics(pages, results):
    text = _text(pages["periodic"].read_text(encoding="utf-8"))
    with xr.open_dataset(results["periodic"]) as ds:
        u = float(ds["thermal_transmittance"])
        f = float(ds["decrement_factor"])
        shift = float(ds["time_shift"])
        k1 = float(ds["areal_heat_capacity_inside"]) / 1000.0
    assert f"{_n(u, '.4g')} W/(m²·K)" in text
    assert _n(f, ".4g") in text
    assert f"{_n(shift, '.4g')} h" in text
    assert f"{_n(k1, '.4g')} kJ/(m²·K)" in text
    assert "ISO 13786" in text


def test_sweep_ranges(pages, results):
    text = _text(pages["sweep"].read_text(encoding="utf-8"))
    with xr.open_dataset(results["sweep"]) as ds:
        mean = ds["heat_flow_inside_mean"].values
        points = int(ds.attrs["sweep_points"])
    assert f"{_n(mean.min(), '.4g')} W/m²" in text and f"{_n(mean.max(), '.4g')} W/m²" in text
    assert f"{points} points" in text


def test_condensation_from_a_spec_shaped_dataset(pages, results):
    text = _text(pages["condensation"].read_text(encoding="utf-8"))
    with xr.open_dataset(results["condensation"]) as ds:
        peak = float(ds["accumulated_moisture"].max())
        verdict = ds.attrs["verdict"]
    assert f"Verdict: {verdict}" in text
    assert f"{_n(peak, '.4g')} kg/m²" in text
    assert "November" in text  # first_month = 11
    assert "ISO 13788" in text
    from layers.html_report import condensation_cautions

    for line in condensation_cautions():  # the method's own caution, as `layers condensation` words it
        assert line in text


def test_condensation_from_the_command(tmp_path):
    """The result of `layers condensation` itself, where this version has the command."""
    from layers.cli import build_parser

    case = CASES / "timber-frame-wall-no-vcl.toml"
    commands = build_parser()._subparsers._group_actions[0].choices
    if "condensation" not in commands or not case.is_file():
        pytest.skip("no `layers condensation` command or its demo case in this version")
    result, page = tmp_path / "c.nc", tmp_path / "c.html"
    assert _cli("condensation", case, "-o", result, "--archive", tmp_path / "archive") in (0, 1)  # 1: moisture accumulates
    assert _cli("report", result, "-o", page) == 0
    text = _text(page.read_text(encoding="utf-8"))
    strict(page.read_text(encoding="utf-8"))
    with xr.open_dataset(result) as ds:
        peak = float(ds["accumulated_moisture"].max())
        verdict = ds.attrs["verdict"]
        names = [str(v) for v in ds["interface_name"].values] if "interface_name" in ds else []
    assert f"Verdict: {verdict}" in text and f"{_n(peak, '.4g')} kg/m²" in text
    assert all(name in text for name in names)
    assert "data:image/png;base64," in text  # the condensation figure of layers.plots


def test_condensation_is_told_by_its_variables_without_a_product(results, tmp_path):
    from layers.html_report import result_kind

    with xr.open_dataset(results["condensation"]) as ds:
        ds = ds.load()
    del ds.attrs["product"]
    assert result_kind(ds, "x.nc") == "condensation"


def test_two_runs_compared(pages, results):
    """Two runs of one time plan: the metrics of layers.comparison over their
    common window (here the whole of both runs), with B − A."""
    text = _text(pages["two runs"].read_text(encoding="utf-8"))
    assert "Comparison" in text and "metric over the common window" in text
    maxima = []
    for key in ("run", "run2"):
        with xr.open_dataset(results[key]) as ds:
            assert ds.attrs["title"] in text
            maxima.append(float(ds["surface_temperature_outside"].max()))
    assert _n(maxima[0], ".4g") in text and _n(maxima[1], ".4g") in text
    assert _n(maxima[1] - maxima[0], "+.4g") in text
    assert "layers[3].thickness" in text and "160 mm" in text  # the case key that differs (comparison.flatten_case)


def test_run_and_sizing_side_by_side(pages, results):
    """Files that are not comparable runs: their headline figures side by side."""
    text = _text(pages["run and sizing"].read_text(encoding="utf-8"))
    assert "Headline figures side by side" in text
    with xr.open_dataset(results["sizing"]) as ds:
        rec = float(ds.attrs["recommended_thickness"])
    with xr.open_dataset(results["run"]) as ds:
        hottest = float(ds["surface_temperature_outside"].max())
    assert f"{rec * 1000:g} mm" in text and f"{hottest:.2f} °C" in text


# --------------------------------------------------------------------------- #
# untrusted text, fallbacks, defaults


def test_title_and_names_from_the_file_are_escaped(results, tmp_path):
    with xr.open_dataset(results["run"]) as ds:
        ds = ds.load()
    ds.attrs["title"] = "<script>alert('t')</script> & <b>bold</b>"
    ds.attrs["label"] = "<img src=http://example.invalid/x.png>"
    ds = ds.assign_coords(material=("x", np.array(["<i>foam</i>"] * ds.sizes["x"], dtype=object)))
    ds.attrs["case"] = "title = '<script>x</script>'\n[[[ not toml"
    bad = tmp_path / "hostile.nc"
    ds.to_netcdf(bad)
    out = tmp_path / "hostile.html"
    assert _cli("report", bad, "-o", out) == 0
    page = out.read_text(encoding="utf-8")
    parsed = strict(page)
    assert "<script" not in page and "<b>bold" not in page and "<i>foam" not in page
    assert "&lt;script&gt;alert(" in page
    assert "&lt;i&gt;foam&lt;/i&gt;" in page  # the layer table from the dataset (the case text does not read)
    assert all(r.startswith(("data:", "#")) for r in parsed.references)
    assert "could not be read again" in page


def test_case_text_that_does_not_read_falls_back_to_the_dataset(results, tmp_path):
    with xr.open_dataset(results["run"]) as ds:
        ds = ds.load()
    ds.attrs["case"] = "[layers\nthis is no TOML"
    old = tmp_path / "older.nc"
    ds.to_netcdf(old)
    out = tmp_path / "older.html"
    assert _cli("report", old, "-o", out) == 0
    text = _text(out.read_text(encoding="utf-8"))
    assert "as the dataset records them" in text
    faces = ds["layer_interface"].values
    for number in range(1, faces.size):  # thicknesses from the layer faces the run recorded
        assert f"{(faces[number] - faces[number - 1]) * 1000:.1f}" in text


def test_series_dir_lets_a_series_case_be_described(results, tmp_path, monkeypatch):
    """wool-grid.toml reads weather-synthetic-site.csv, which is not beside the
    result: from a folder that does not hold it (in it or one folder down) the
    page falls back, with --series-dir the case reads, and so it does from the
    project folder, whose cases/ holds it (a copy is used only when its SHA-256
    is the run's)."""
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    monkeypatch.chdir(elsewhere)
    text = _text(pages_text(results["sweep"], tmp_path / "without.html"))
    assert "could not be read again" in text and "Sources of the material properties" not in text
    text = _text(pages_text(results["sweep"], tmp_path / "with.html", "--series-dir", CASES))
    assert "could not be read again" not in text
    assert "Sources of the material properties" in text and "defined in the case file" in text  # [materials.site-wool]
    monkeypatch.chdir(CASES.parent)
    text = _text(pages_text(results["sweep"], tmp_path / "from-project.html"))
    assert "could not be read again" not in text and "Sources of the material properties" in text


def pages_text(result: Path, out: Path, *options) -> str:
    assert _cli("report", result, "-o", out, *options) == 0
    return out.read_text(encoding="utf-8")


def test_default_name_in_the_current_folder_and_never_overwritten(results, tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    assert _cli("report", results["periodic"]) == 0
    target = tmp_path / f"{results['periodic'].stem}-report.html"
    assert target.is_file()
    assert f"written: {target.name}" in capsys.readouterr().out
    before = target.read_bytes()
    assert _cli("report", results["periodic"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "exists" in err[0]
    assert target.read_bytes() == before


def test_an_interrupted_write_leaves_nothing(results, tmp_path, monkeypatch):
    """The page goes to a temporary file first: a write that stops half way
    (Ctrl-C) leaves neither the page nor the temporary file."""
    real = Path.write_bytes

    def half_then_interrupt(self, data):
        real(self, data[: len(data) // 2])
        raise KeyboardInterrupt

    monkeypatch.setattr(Path, "write_bytes", half_then_interrupt)
    out = tmp_path / "page.html"
    assert _cli("report", results["periodic"], "-o", out) == 130
    assert list(tmp_path.iterdir()) == []


def _garbage(path: Path) -> Path:
    path.write_bytes(b"\x00garbage, not netCDF\n" * 20)
    return path


def _foreign(path: Path) -> Path:
    xr.Dataset({"rainfall": ("day", np.arange(3.0))}).to_netcdf(path)
    return path


@pytest.mark.parametrize("make, words", [
    (lambda d, r: d / "missing.nc", "no such file"),
    (lambda d, r: _garbage(d / "garbage.nc"), "not a netCDF file"),
    (lambda d, r: _foreign(d / "foreign.nc"), "not a layers result"),
])
def test_bad_input_exit_2_one_line(results, tmp_path, capsys, make, words):
    path = make(tmp_path, results)
    out = tmp_path / "page.html"
    assert _cli("report", path, "-o", out) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1, err
    assert path.name in err[0] and words in err[0]
    assert not out.exists()


def test_comparison_file_is_refused(results, tmp_path, capsys):
    combined = tmp_path / "combined.nc"
    assert _cli("compare", results["run"], results["run2"], "-o", combined) == 0
    capsys.readouterr()
    out = tmp_path / "page.html"
    assert _cli("report", combined, "-o", out) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "combined.nc" in err[0] and "comparison" in err[0]
    assert not out.exists()


@pytest.mark.parametrize("name", ["exists.html", "page.txt"])
def test_bad_output_exit_2_one_line(results, tmp_path, capsys, name):
    out = tmp_path / name
    if name == "exists.html":
        out.write_text("keep me", encoding="utf-8")
    assert _cli("report", results["periodic"], "-o", out) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and name in err[0]
    assert not out.exists() or out.read_text(encoding="utf-8") == "keep me"


# --------------------------------------------------------------------------- #
# a real browser

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
#: Longest a browser call may take [s] (a cold start here takes 1-3 s).
BROWSER_TIMEOUT = 60


def _browser(tmp_path: Path, *args: str) -> subprocess.CompletedProcess:
    profile = tmp_path / f"profile-{len(list(tmp_path.iterdir()))}"
    flags = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
             "--disable-background-networking", "--disable-component-update", "--disable-sync",
             f"--user-data-dir={profile}"]
    return subprocess.run([CHROMIUM, *flags, *args], capture_output=True, timeout=BROWSER_TIMEOUT, check=False)


def _pdf_pages(pdf: Path) -> int:
    """Pages of a PDF: pdfinfo where installed, else the page objects in its bytes."""
    if shutil.which("pdfinfo"):
        info = subprocess.run(["pdfinfo", str(pdf)], capture_output=True, text=True, timeout=30, check=False).stdout
        match = re.search(r"^Pages:\s+(\d+)", info, re.M)
        if match:
            return int(match.group(1))
    return len(re.findall(rb"/Type\s*/Page(?![s\w])", pdf.read_bytes()))


@pytest.mark.skipif(CHROMIUM is None, reason="no chromium on this machine (apt-get install chromium); the browser check is skipped")
def test_browser_renders_and_prints(pages, results, tmp_path):
    page = pages["run"]
    dom = _browser(tmp_path, "--dump-dom", page.as_uri())
    assert dom.returncode == 0, dom.stderr[-500:]
    text = html.unescape(dom.stdout.decode("utf-8", errors="replace"))
    with xr.open_dataset(results["run"]) as ds:
        title = ds.attrs["title"]
        hottest = float(ds["surface_temperature_outside"].max())
    assert title in text and f"{hottest:.2f} °C" in text
    for name, low, high in (("run", 3, 12), ("sizing", 2, 8)):
        pdf = tmp_path / f"{name}.pdf"
        done = _browser(tmp_path, "--no-pdf-header-footer", f"--print-to-pdf={pdf}", pages[name].as_uri())
        assert done.returncode == 0, done.stderr[-500:]
        assert pdf.read_bytes()[:5] == b"%PDF-"
        count = _pdf_pages(pdf)
        assert low <= count <= high, (name, count)  # A4: the page's sections each start a page; figures fit one each


def test_a_result_missing_what_its_kind_needs_is_refused(results, tmp_path, capsys):
    """A sizing file without its verdicts (a damaged or foreign file): one line, exit 2."""
    with xr.open_dataset(results["sizing"]) as ds:
        ds = ds.load()
    broken = tmp_path / "broken-size.nc"
    ds.drop_vars("passes_all").to_netcdf(broken)
    out = tmp_path / "page.html"
    assert _cli("report", broken, "-o", out) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "broken-size.nc" in err[0] and "passes_all" in err[0]
    assert not out.exists()
