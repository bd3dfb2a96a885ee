"""``layers verify``: the shipped verification checks, their command and their outputs.

The checks themselves (layers/verification.py, cases in layers/data/verification/)
carry their references, tolerances and reasons; these tests make sure they all
pass here, that a wrong reference makes them fail, that the table covers every
physics path, that docs/validation.md is the table's own Markdown, and that the
command never overwrites a file and writes a self-contained page.
"""

from __future__ import annotations

import dataclasses
import math
import re
from html.parser import HTMLParser
from pathlib import Path

import pytest

from layers import verification
from layers.case import load_case
from layers.cli import main

ROOT = Path(__file__).resolve().parents[1]

#: The physics paths the brief names; each must have at least one check.
REQUIRED_PATHS = {
    "steady-planar", "steady-cylinder", "semi-infinite", "slab-series", "periodic", "films", "dew-point",
    "k-of-t", "freezing", "order", "exact", "condensation", "films-planar", "sun", "sizing",
}


@pytest.fixture(scope="module")
def results():
    """Every check, run once for the module (about 2 s here)."""
    return verification.run_checks()


def test_every_check_passes(results):
    failed = [f"{r.check.id}: expected {r.expected!r}, computed {r.computed!r} ({r.problem})" for r in results if not r.passed]
    assert not failed, "\n".join(failed)
    assert len(results) == len(verification.checks())


def test_the_table_covers_every_physics_path():
    paths = {c.path for c in verification.checks()}
    assert REQUIRED_PATHS <= paths
    assert paths <= set(verification.PATHS)


def test_each_check_names_its_source_tag_tolerance_and_reason():
    ids = [c.id for c in verification.checks()]
    assert len(ids) == len(set(ids)), "check ids must be unique"
    for c in verification.checks():
        assert re.fullmatch(r"[a-z0-9][a-z0-9.-]*", c.id), c.id
        assert c.tag in {"found", "from memory", "computed"}, c.id
        assert c.source.strip() and c.reason.strip() and c.what.strip(), c.id
        assert c.tolerance > 0 and math.isfinite(c.tolerance), c.id
        assert math.isfinite(c.expected_value()), c.id


def test_the_shipped_cases_are_ordinary_case_files():
    """Every case a check names is in the package and read by the normal case reader."""
    names = {c.case for c in verification.checks() if c.case}
    shipped = {p.name for p in (ROOT / "layers" / "data" / "verification").glob("*.toml")}
    assert names == shipped
    for name in names:
        assert load_case(verification.case_path(name)).title.startswith("verification:")


def test_the_runner_imports_nothing_from_the_tests_and_does_not_print():
    text = (ROOT / "layers" / "verification.py").read_text(encoding="utf-8")
    assert not re.search(r"^\s*(from|import)\s+tests\b", text, re.M)
    assert "print(" not in text


def test_a_wrong_expected_value_or_tolerance_fails():
    """The brick wall's U is 2.174 by the run and 2.17 as printed: moving the expected value
    by a tenth, or tightening the tolerance below the book's rounding, must fail it."""
    for changes in ({"expected": 2.27}, {"tolerance": 1e-6}):
        table = [c for c in verification.broken("steady-planar-brick-wall", **changes) if c.id == "steady-planar-brick-wall"]
        (result,) = verification.run_checks(table)
        assert not result.passed
        assert result.computed == pytest.approx(2.1741, abs=1e-4)  # the run itself is unchanged


def test_a_live_library_that_disagrees_fails_the_check_and_a_missing_one_is_skipped():
    (check,) = [c for c in verification.checks() if c.id == "film-cylinder-crossflow"]
    (disagrees,) = verification.run_checks([dataclasses.replace(check, live=lambda: 41.0)])
    assert not disagrees.passed and "live" in disagrees.problem

    def missing() -> float:
        raise ImportError("no ht here")

    (absent,) = verification.run_checks([dataclasses.replace(check, live=missing)])
    assert absent.passed and absent.live is None


def test_a_failing_computation_is_a_failed_check_not_a_crash():
    (check,) = [c for c in verification.checks() if c.id == "dew-point-20degc-50pct"]

    def boom(runs) -> float:
        raise ZeroDivisionError("deliberately")

    (result,) = verification.run_checks([dataclasses.replace(check, compute=boom)])
    assert not result.passed and "ZeroDivisionError" in result.problem and math.isnan(result.computed)


def _small_table(broken: bool):
    keep = {"dew-point-20degc-50pct", "film-plate-free"}
    table = verification.broken("film-plate-free", expected=150.0) if broken else verification.checks()
    return tuple(c for c in table if c.id in keep)


@pytest.mark.parametrize("broken, status", [(False, 0), (True, 1)])
def test_the_command_exits_1_when_a_check_fails(monkeypatch, tmp_path, capsys, broken, status):
    table = _small_table(broken)
    monkeypatch.setattr(verification, "checks", lambda: table)
    out = tmp_path / "verify.html"
    assert main(["verify", "-o", str(out)]) == status
    printed = capsys.readouterr().out
    assert ("FAIL  film-plate-free" in printed) == broken
    assert "dew-point-20degc-50pct" in printed and out.exists()


def test_o_refuses_an_existing_file_before_any_work(monkeypatch, tmp_path, capsys):
    def never():
        raise AssertionError("no check may run when the output would overwrite a file")

    monkeypatch.setattr(verification, "checks", never)
    out = tmp_path / "report.html"
    out.write_text("keep me", encoding="utf-8")
    assert main(["verify", "-o", str(out)]) == 2
    assert out.read_text(encoding="utf-8") == "keep me"
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "never overwrites" in err[0]
    assert main(["verify", "-o", str(tmp_path / "report.txt")]) == 2  # not a page's name
    notes = tmp_path / "notes.md"
    notes.write_text("# my notes\n", encoding="utf-8")
    assert main(["verify", "--markdown", str(notes)]) == 2  # a Markdown file without the markers
    assert notes.read_text(encoding="utf-8") == "# my notes\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["notes.md", "report.html"]


def test_markdown_regenerates_only_between_the_markers(monkeypatch, tmp_path):
    table = _small_table(False)
    monkeypatch.setattr(verification, "checks", lambda: table)
    doc = tmp_path / "validation.md"
    doc.write_text(f"# head\n\n{verification.MARK_BEGIN}\nold\n{verification.MARK_END}\n\ntail\n", encoding="utf-8")
    assert main(["verify", "--markdown", str(doc)]) == 0
    text = doc.read_text(encoding="utf-8")
    assert text.startswith("# head\n\n") and text.endswith("\n\ntail\n") and "old" not in text
    assert "`film-plate-free`" in text
    fresh = tmp_path / "new.md"
    assert main(["verify", "--markdown", str(fresh)]) == 0
    assert fresh.read_text(encoding="utf-8").startswith(verification.MARK_BEGIN)
    assert not list(tmp_path.glob(".*partial"))


def test_docs_validation_is_up_to_date(results):
    """docs/validation.md holds the table generated from the runner's own table
    (regenerate with `layers verify --markdown docs/validation.md`)."""
    committed = (ROOT / "docs" / "validation.md").read_text(encoding="utf-8")
    assert verification.splice_markdown(committed, verification.markdown_section(results)) == committed
    for c in verification.checks():
        assert f"`{c.id}`" in committed


class _Balance(HTMLParser):
    VOID = {"meta", "br", "hr", "img", "input", "link", "col", "area", "base", "source", "wbr"}

    def __init__(self) -> None:
        super().__init__()
        self.stack: list[str] = []
        self.problems: list[str] = []
        self.attributes: list[str] = []

    def handle_starttag(self, tag, attrs):
        self.attributes += [f"{k}={v}" for k, v in attrs]
        if tag not in self.VOID:
            self.stack.append(tag)

    def handle_endtag(self, tag):
        if not self.stack or self.stack[-1] != tag:
            self.problems.append(f"</{tag}> closes {self.stack[-1:] or 'nothing'}")
        else:
            self.stack.pop()


def test_the_page_is_well_formed_self_contained_and_escaped(results):
    bad = dataclasses.replace(verification.checks()[0], what="<script>alert(1)</script> & co")
    page = verification.html_report([*results, dataclasses.replace(results[0], check=bad)], seconds=1.0)
    parser = _Balance()
    parser.feed(page)
    parser.close()
    assert not parser.problems and not parser.stack, (parser.problems, parser.stack)
    assert page.lstrip().lower().startswith("<!doctype html>")
    assert "<script" not in page and "&lt;script&gt;" in page  # autoescape on
    for attribute in parser.attributes:
        assert not re.search(r"(src|href)=", attribute), attribute
    assert not re.search(r"https?:|//[a-z]|@import|url\(", page, re.I)
    for r in results:
        assert r.check.id in page
    assert f"{len(results) + 1} of {len(results) + 1} checks pass" in page


def test_the_brute_force_freeze_reference_is_resolved():
    """The tolerance of the freeze checks (one 30 s step of the run) rests on the brute force
    being converged: halving its cells moves its times by far less than that."""
    coarse = verification.freeze_brute_force(4, 20)
    fine = verification.freeze_brute_force(8, 40)
    assert abs(coarse[0] - fine[0]) < 1e-4 and abs(coarse[1] - fine[1]) < 1e-5
