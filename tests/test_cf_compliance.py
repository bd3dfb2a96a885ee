"""Files written by run, size, periodic and compare pass the IOOS compliance checker (cf:1.10) with no errors."""

from __future__ import annotations

import json

import pytest

from layers.cli import main

import compliance_checker.runner  # noqa: E402,F401  (test extra: fails loudly if missing)


def _errors(path, tmp_path) -> list[str]:
    from compliance_checker.runner import CheckSuite, ComplianceChecker

    CheckSuite().load_all_available_checkers()
    report = tmp_path / f"{path.stem}.json"
    ComplianceChecker.run_checker(str(path), ["cf:1.10"], 0, "normal", output_filename=str(report), output_format="json")
    result = next(iter(json.loads(report.read_text()).values()))
    return [f"{i['name']}: {i['msgs']}" for i in result["high_priorities"] if i["value"][0] < i["value"][1]]


@pytest.mark.parametrize(
    "command,case",
    [
        ("run", "cases/steam-line-warm-up.toml"),
        ("run", "cases/outdoor-water-freeze.toml"),
        ("size", "cases/hot-oil-line-touch.toml"),
        ("periodic", "cases/masonry-wall-hot-week.toml"),
    ],
)
def test_written_files_have_no_cf_errors(tmp_path, capsys, command, case):
    out = tmp_path / f"{command}.nc"
    args = [command, case, "-o", str(out)]
    if command in ("run", "size"):
        args += ["--archive", str(tmp_path / "runs"), "--quiet"]
    assert main(args) == 0
    assert _errors(out, tmp_path) == []


def test_combined_comparison_has_no_cf_errors(tmp_path, capsys):
    """The Dataset ``layers compare -o X.nc`` writes (runs along ``run``) is CF-1.10 too."""
    runs = tmp_path / "runs"
    for thickness in ("40 mm", "60 mm"):
        case = tmp_path / f"freeze-{thickness.split()[0]}.toml"
        text = open("cases/outdoor-water-freeze.toml", encoding="utf-8").read()
        case.write_text(text.replace('thickness = "40 mm"', f'thickness = "{thickness}"'), encoding="utf-8")
        assert main(["run", str(case), "--archive", str(runs), "--quiet"]) == 0
    out = tmp_path / "compare.nc"
    assert main(["compare", *sorted(str(p) for p in runs.glob("*.nc")), "-o", str(out)]) == 0
    assert _errors(out, tmp_path) == []
