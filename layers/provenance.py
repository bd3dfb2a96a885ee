"""Re-running an archived run from the case text it carries.

Every run stores its full case text, the case's SHA-256, and for a series
its file name, path and SHA-256 (and the file itself with
``embed_series = true``).  :func:`load_archived_case` rebuilds the case in a
private temporary folder, so the run can be reproduced without the original
files when its series was embedded, or from the original series file when
its hash still matches.
"""

from __future__ import annotations

import hashlib
import tempfile
import tomllib
from pathlib import Path, PurePosixPath

import netCDF4

from layers.case import Case, load_case
from layers.errors import CaseError


def _safe_relative(name: str, file: str) -> Path:
    p = PurePosixPath(name.replace("\\", "/"))
    if p.is_absolute() or ".." in p.parts:
        return Path(p.name)
    return Path(*p.parts)


def load_archived_case(run: str | Path) -> Case:
    """The case of an archived run, ready to run again.

    Raises
    ------
    CaseError
        If the file is not a layers run, or its series can be found neither
        embedded nor unchanged at its original path.
    """
    run = Path(run)
    try:
        with netCDF4.Dataset(run) as nc:
            attrs = {k: nc.getncattr(k) for k in nc.ncattrs()}
    except (OSError, RuntimeError) as exc:
        raise CaseError(str(run), "--again", f"cannot read the run ({exc})") from None
    text = attrs.get("case")
    if not isinstance(text, str) or "case_sha256" not in attrs:
        raise CaseError(str(run), "--again", "is not a layers run (no case text)")
    if hashlib.sha256(text.encode("utf-8")).hexdigest() != attrs["case_sha256"]:
        raise CaseError(str(run), "case", "the stored case text does not match its case_sha256")
    folder = Path(tempfile.mkdtemp(prefix="layers-again-"))
    case_path = folder / str(attrs.get("case_file", "case.toml"))
    case_path.write_text(text, encoding="utf-8")
    series_name = (tomllib.loads(text).get("series") or {}).get("file")
    if series_name:
        target = folder / _safe_relative(series_name, str(run))
        target.parent.mkdir(parents=True, exist_ok=True)
        embedded = attrs.get("series_embedded")
        if isinstance(embedded, str):
            target.write_text(embedded, encoding="utf-8")
            source = "the copy embedded in the run"
        else:
            original = _original_series(attrs, series_name)
            if original is None:
                raise CaseError(
                    str(run), "series",
                    f"the series {series_name} was not embedded and is not at {attrs.get('series_path', '?')}",
                )
            data = original.read_bytes()
            if hashlib.sha256(data).hexdigest() != attrs.get("series_sha256"):
                raise CaseError(str(run), "series", f"{original} has changed since the run (SHA-256 differs)")
            target.write_bytes(data)
            source = f"{original} (unchanged: SHA-256 checked)"
        if isinstance(embedded, str) and hashlib.sha256(target.read_bytes()).hexdigest() != attrs.get("series_sha256"):
            raise CaseError(str(run), "series_embedded", "the embedded series does not match its series_sha256")
    case = load_case(case_path)
    case.label = str(attrs.get("label", ""))
    # The re-run records where it came from, not the private folder it ran in.
    case.provenance = {
        "rerun_of": str(run.resolve()),
        **{k: str(attrs[k]) for k in ("case_file", "case_path", "series_path") if k in attrs},
    }
    if series_name:
        case.provenance["series_source"] = source
    return case


def _original_series(attrs: dict, series_name: str) -> Path | None:
    """The series file of a run that did not embed it: at its recorded path,
    or (for runs that recorded a relative path) beside the case file."""
    recorded = Path(str(attrs.get("series_path", "")))
    candidates = [recorded]
    if not recorded.is_absolute() and attrs.get("case_path"):
        candidates.append(Path(str(attrs["case_path"])).parent / series_name)
    return next((p for p in candidates if str(p) and p.is_file()), None)
