"""The public Python API (docs/api.md, the contract's "Python API" section):
the names, their documentation, the examples of docs/api.md, a cheap
``import layers``, and ``help`` from outside the checkout and from an
installed copy.

The source of every expectation here is the product contract (SPEC.md,
"Python API" and "Command line") and docs/api.md; no number is a
verification value.
"""

from __future__ import annotations

import doctest
import inspect
import os
import re
import shutil
import subprocess
import sys
import tomllib
from pathlib import Path

import numpy as np
import pytest

import layers
from layers.api import toml_text
from layers.errors import CaseError

ROOT = Path(__file__).resolve().parents[1]
CASES = ROOT / "cases"
API = ("load_case", "parse_case", "simulate", "size", "periodic", "sweep", "open_run")


def _run(code: str, cwd: Path, env: dict[str, str] | None = None) -> subprocess.CompletedProcess:
    return subprocess.run(
        [sys.executable, "-c", code], cwd=cwd, capture_output=True, text=True, timeout=120,
        env={**os.environ, **(env or {})},
    )


# --------------------------------------------------------------------------- #
# names and documentation


def test_the_contract_names_are_functions_of_the_package():
    for name in API:
        assert name in layers.__all__
        assert inspect.isfunction(getattr(layers, name)), name


def test_no_module_shadows_an_api_function():
    """``layers.simulate`` must stay the function: a module ``layers/simulate.py``
    imported anywhere would replace the package attribute with the module."""
    for name in API:
        assert not (ROOT / "layers" / f"{name}.py").exists()
        assert not (ROOT / "layers" / name).is_dir()


def _section(doc: str, title: str) -> list[tuple[str, str]]:
    """The entries of a numpydoc section: (``name : type`` line, description)."""
    match = re.search(rf"^{title}\n-+\n(.*?)(?=^\S[^\n]*\n-+\n|\Z)", doc, re.S | re.M)
    assert match, f"no {title} section"
    entries: list[tuple[str, str]] = []
    for line in match.group(1).splitlines():
        if line and not line.startswith(" "):
            entries.append((line, ""))
        elif entries:
            entries[-1] = (entries[-1][0], entries[-1][1] + " " + line.strip())
    return entries


@pytest.mark.parametrize("name", API)
def test_every_parameter_and_return_is_documented_with_a_unit(name):
    """STYLE.md 3 and DEVELOPERS.md: numpydoc, a unit in brackets on every
    parameter and return."""
    fn = getattr(layers, name)
    doc = inspect.cleandoc(fn.__doc__)
    params = _section(doc, "Parameters")
    documented = {head.split(" : ")[0] for head, _ in params}
    assert documented == set(inspect.signature(fn).parameters), name
    for head, text in [*params, *_section(doc, "Returns")]:
        assert re.search(r"\[[^\]]+\]", text), f"{name}: no unit in brackets for {head!r}"


def test_help_works_from_outside_the_checkout(tmp_path):
    done = _run("import layers; help(layers.simulate); print(layers.__file__)", tmp_path)
    assert done.returncode == 0, done.stderr
    assert "Parameters" in done.stdout and "[degC]" in done.stdout


def _installed_copy(target: Path) -> Path:
    """The files a non-editable install puts in site-packages, as pyproject.toml
    lists them: the ``layers*`` packages' modules and the ``data/*.toml`` package data."""
    config = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))["tool"]["setuptools"]
    assert config["packages"]["find"]["include"] == ["layers*"]
    for source in (ROOT / "layers").rglob("*.py"):
        dest = target / source.relative_to(ROOT)
        dest.parent.mkdir(parents=True, exist_ok=True)
        shutil.copy2(source, dest)
    for pattern in config["package-data"]["layers"]:
        for source in (ROOT / "layers").glob(pattern):
            dest = target / source.relative_to(ROOT)
            dest.parent.mkdir(parents=True, exist_ok=True)
            shutil.copy2(source, dest)
    return target


def test_help_and_a_case_work_from_an_installed_copy(tmp_path):
    """A non-editable install holds only the package's files: nothing may be read
    from the checkout (run from a folder outside it, the copy first on the path)."""
    site = _installed_copy(tmp_path / "site")
    work = tmp_path / "work"
    work.mkdir()
    shutil.copy2(CASES / "masonry-wall-hot-week.toml", work)
    code = (
        "import layers, pathlib\n"
        "help(layers.simulate)\n"
        "print('FILE', layers.__file__)\n"
        "case = layers.load_case('masonry-wall-hot-week.toml')\n"
        "print('LAYERS', len(case.layers))\n"
    )
    done = _run(code, work, {"PYTHONPATH": str(site), "LAYERS_CACHE_DIR": str(tmp_path / "cache")})
    assert done.returncode == 0, done.stderr
    assert f"FILE {site / 'layers' / '__init__.py'}" in done.stdout
    assert "LAYERS 4" in done.stdout and "Parameters" in done.stdout


# --------------------------------------------------------------------------- #
# what importing costs (modules loaded, never times: speed lives in benchmarks/)


def test_import_layers_loads_no_heavy_module(tmp_path):
    done = _run(
        "import sys, layers\n"
        "print(sorted(m for m in ('numpy', 'scipy', 'xarray', 'pint', 'matplotlib', 'netCDF4', 'layers.case') if m in sys.modules))",
        tmp_path,
    )
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip() == "[]"


def _modules_after(code: str, cwd: Path) -> set[str]:
    done = _run(code + "\nprint(*sorted(sys.modules))\n", cwd)
    assert done.returncode == 0, done.stderr
    return set(done.stdout.split())


def _modules_after_check(tmp_path) -> set[str]:
    code = (
        "import sys, contextlib, io\n"
        "from layers.cli import main\n"
        "with contextlib.redirect_stdout(io.StringIO()):\n"
        f"    status = main(['check', {str(CASES / 'masonry-wall-hot-week.toml')!r}])\n"
        "assert status == 0, status\n"
    )
    return _modules_after(code, tmp_path)


def test_check_imports_neither_xarray_nor_matplotlib_nor_netcdf(tmp_path):
    """``layers check`` validates and prints: it needs none of the result,
    plotting or file libraries (about half a second of start-up)."""
    assert not _modules_after_check(tmp_path) & {"xarray", "matplotlib", "netCDF4", "pandas"}


def test_check_imports_no_part_of_scipy(tmp_path):
    """Neither validation nor the steady solver of ``layers check`` needs scipy.
    pint probes for it with a bare ``import scipy`` (cheap); nothing beyond what
    that alone loads (``scipy.linalg``: about 0.15 s) may come in."""
    bare = {m for m in _modules_after("import sys, scipy", tmp_path) if m.startswith("scipy.")}
    loaded = {m for m in _modules_after_check(tmp_path) if m.startswith("scipy.")}
    assert loaded <= bare, sorted(loaded - bare)


# --------------------------------------------------------------------------- #
# the examples of docs/api.md


def test_docs_api_examples_run(monkeypatch):
    """Every example of docs/api.md, run from cases/ (the autouse fixture points
    the archive and the cache at a temporary folder; the examples write only
    into a folder of their own under the system's temporary directory)."""
    monkeypatch.chdir(CASES)
    before = sorted(p.name for p in CASES.iterdir())
    result = doctest.testfile(
        str(ROOT / "docs" / "api.md"), module_relative=False, optionflags=doctest.ELLIPSIS, verbose=False,
        report=True,
    )
    assert result.attempted > 20
    assert result.failed == 0
    assert sorted(p.name for p in CASES.iterdir()) == before


# --------------------------------------------------------------------------- #
# parse_case: TOML text or a dict


@pytest.mark.parametrize("path", sorted(CASES.glob("*.toml")), ids=lambda p: p.name)
def test_a_case_dict_written_back_as_toml_reads_back_the_same(path):
    data = tomllib.loads(path.read_text(encoding="utf-8"))
    assert tomllib.loads(toml_text(data)) == data


def test_toml_text_keeps_awkward_keys_and_values():
    import datetime as dt

    data = {
        "title": 'quote " backslash \\ tab \t del \x7f é',
        "odd key": 1,
        "numbers": [1, 2.5, float("inf"), -float("inf"), np.float64(0.1), np.int64(3)],
        "when": dt.datetime(2026, 1, 2, 3, 4, 5, tzinfo=dt.timezone.utc),
        "day": dt.date(2026, 1, 2),
        "nested": {"a": {"b": True, "list": [{"x": 1}, {"x": 2}]}, "empty": {}},
        "tables": [{"name": "a", "sub": {"k": "v"}}, {"name": "b"}],
        "empty": [],
    }
    back = tomllib.loads(toml_text(data))
    expected = {**data, "numbers": [1, 2.5, float("inf"), -float("inf"), 0.1, 3]}
    assert back == expected
    assert np.isnan(tomllib.loads(toml_text({"v": float("nan")}))["v"])


def test_toml_text_refuses_what_toml_cannot_hold():
    with pytest.raises(CaseError, match=r"layers\[1\]\.thickness: a NoneType cannot be written"):
        toml_text({"layers": [{"thickness": None}]})


def test_parse_case_from_a_dict_runs_as_the_file_does():
    path = CASES / "masonry-wall-hot-week.toml"
    data = tomllib.loads(path.read_text(encoding="utf-8"))
    from_file = layers.simulate(layers.load_case(path))
    from_dict = layers.simulate(layers.parse_case(data, base_dir=CASES))
    np.testing.assert_array_equal(from_file.temperature.values, from_dict.temperature.values)
    assert tomllib.loads(from_dict.attrs["case"]) == data


def test_parse_case_errors_name_the_file():
    with pytest.raises(CaseError, match=r"^mine\.toml: \(syntax\): malformed TOML"):
        layers.parse_case("title = ", file="mine.toml")
    with pytest.raises(CaseError, match="give TOML text or a dict, not list"):
        layers.parse_case([("title", "x")])


# --------------------------------------------------------------------------- #
# periodic and open_run


@pytest.mark.parametrize(
    "period, reason",
    [("-1 h", "must be positive"), (0, "must be positive"), ("24 m", "is not a duration"), (True, "expected a quantity")],
)
def test_periodic_refuses_a_period_that_is_no_positive_duration(period, reason):
    case = layers.load_case(CASES / "masonry-wall-hot-week.toml")
    with pytest.raises(CaseError, match=rf"\(argument\): period: .*{reason}"):
        layers.periodic(case, period=period)


def test_periodic_returns_what_the_command_writes(tmp_path):
    """The same characteristics as ``layers periodic -o`` (SPEC "Command line")."""
    import xarray as xr

    from layers.cli import main

    out = tmp_path / "p.nc"
    assert main(["periodic", str(CASES / "masonry-wall-hot-week.toml"), "--period", "12 h", "-o", str(out)]) == 0
    ds = layers.periodic(layers.load_case(CASES / "masonry-wall-hot-week.toml"), period=12 * 3600)
    with xr.open_dataset(out) as written:
        for name in ("thermal_transmittance", "periodic_transmittance", "decrement_factor", "time_shift",
                     "areal_heat_capacity_inside", "areal_heat_capacity_outside"):
            assert written[name].item() == ds[name].item(), name
    assert ds.attrs["product"] == "periodic"


def test_open_run_refuses_what_is_not_a_run(tmp_path):
    with pytest.raises(CaseError, match="no such file"):
        layers.open_run(tmp_path / "missing.nc")
    text = tmp_path / "notes.nc"
    text.write_text("not netCDF")
    with pytest.raises(CaseError, match="is not a netCDF file layers can read"):
        layers.open_run(text)


def test_open_run_reads_an_archived_run_closed(tmp_path):
    from layers.cli import main

    assert main(["run", str(CASES / "masonry-wall-hot-week.toml"), "--quiet", "--archive", str(tmp_path)]) == 0
    (path,) = tmp_path.glob("*.nc")
    ds = layers.open_run(path)
    assert ds.attrs["product"] == "run" and ds.temperature.attrs["units"] == "degC"
    path.unlink()  # loaded and closed: the data stay usable without the file
    assert np.isfinite(ds.temperature.values).all()
