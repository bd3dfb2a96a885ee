"""The demo cases are tests too: every file in cases/ checks and runs."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from layers.case import load_case
from layers.cli import main

CASES = sorted((Path(__file__).resolve().parents[1] / "cases").glob("*.toml"))


@pytest.mark.parametrize("path", CASES, ids=[p.stem for p in CASES])
def test_case_checks_and_runs(path, tmp_path, capsys):
    """`layers check` and `layers run` succeed; the archived run is complete and conserves energy."""
    assert main(["check", str(path)]) == 0
    out = capsys.readouterr().out
    assert "caution" in out
    case = load_case(path)
    if case.sizing is not None and case.time.duration > 30 * 86400:
        pytest.skip("long sizing cases are run by the sizing tests")
    if case.sweep:  # a sweep case: its grid, as one file, every point physical
        assert main(["sweep", str(path), "--archive", str(tmp_path / "sweep"), "--quiet"]) == 0
        (grid,) = (tmp_path / "sweep").glob(f"{path.stem}-sweep-*.nc")
        import xarray as xr

        with xr.open_dataset(grid) as ds:
            assert np.isfinite(ds["surface_temperature_outside"].values).all()
            assert float(ds["energy_balance_error"].max()) < 1e-6
    assert main(["run", str(path), "--archive", str(tmp_path), "--quiet"]) == 0
    files = list(tmp_path.glob(f"{path.stem}-*.nc"))
    assert len(files) == 1
    import xarray as xr

    with xr.open_dataset(files[0]) as ds:
        assert np.isfinite(ds["temperature"].values).all()
        assert ds.attrs["energy_balance_error"] < 1e-6
        assert ds.attrs["case_sha256"] == case.sha256


@pytest.mark.parametrize(
    "stem, words",
    [
        ("hot-oil-line-touch", "Touch limits depend on the contact time"),
        ("chilled-water-condensation", "vapour barrier"),
        ("outdoor-water-freeze", "only delays freezing"),
    ],
)
def test_runs_print_the_caution_their_results_call_for(stem, words, tmp_path, capsys):
    """Burns, condensation and freezing: `layers run` prints the specific
    caution (even with --quiet), before the general one."""
    path = Path(__file__).resolve().parents[1] / "cases" / f"{stem}.toml"
    assert main(["run", str(path), "--archive", str(tmp_path), "--quiet"]) == 0
    cautions = [line for line in capsys.readouterr().out.splitlines() if line.startswith("caution:")]
    assert len(cautions) == 2 and words in cautions[0]
