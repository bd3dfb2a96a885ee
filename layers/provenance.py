"""Re-running an archived run from the case text it carries.

Every run stores its full case text, the case's SHA-256, and for a series
its base name and SHA-256 (and the file itself with ``embed_series = true``).
The user's folders are not recorded unless asked (``layers run
--record-paths``).  :func:`load_archived_case` rebuilds the case in a private
temporary folder, so the run can be reproduced without the original files
when its series was embedded, or from an unchanged copy of the series found
beside the run, in a folder given on the command line, or (older runs, or
runs that recorded paths) where the run says it was.

Archived runs are shared between colleagues, so nothing read from a run file
decides where the tool writes: the case and the series are written under
their base names (restricted to plain characters) into a fresh private
folder, with ``O_EXCL | O_NOFOLLOW``, and the folder is removed once the case
is loaded.
"""

from __future__ import annotations

import hashlib
import os
import re
import shutil
import tempfile
import tomllib
from pathlib import Path

from layers.case import Case, base_name, load_case
from layers.errors import CaseError

_PLAIN = re.compile(r"[^A-Za-z0-9._-]")


def private_name(name: object, default: str) -> str:
    """A file name read from a run, made safe to create in a private folder.

    Only the base name is kept, characters other than letters, digits, dot,
    hyphen and underscore become ``_``, and names that would be hidden,
    special (``.``, ``..``) or empty fall back to ``default``.
    """
    text = _PLAIN.sub("_", base_name(str(name)))[:120]
    if not text or text.startswith("."):
        return default
    return text


def _write_private(folder: Path, name: str, data: bytes) -> Path:
    """Create ``folder/name`` (never following a link, never replacing a file)."""
    path = folder / name
    flags = os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_NOFOLLOW", 0)
    try:
        fd = os.open(path, flags, 0o600)
    except OSError as exc:
        raise CaseError(str(path), "--again", f"cannot create the private copy ({exc.strerror})") from None
    with os.fdopen(fd, "wb") as fh:
        fh.write(data)
    return path


def load_archived_case(run: str | Path, series_dirs: tuple[Path, ...] = ()) -> Case:
    """The case of an archived run, ready to run again.

    Parameters
    ----------
    run : path
        The archived run file.
    series_dirs : tuple of Path
        Further folders to look in for a series that the run did not embed
        (after the folder of the run itself).

    Raises
    ------
    CaseError
        If the file is not a layers run, or its series can be found neither
        embedded nor unchanged in any of the places looked at.
    """
    run = Path(run)
    try:
        import netCDF4

        with netCDF4.Dataset(run) as nc:
            attrs = {k: nc.getncattr(k) for k in nc.ncattrs()}
    except (OSError, RuntimeError, UnicodeError, ValueError) as exc:
        raise CaseError(str(run), "--again", f"cannot read the run ({exc})") from None
    text = attrs.get("case")
    if not isinstance(text, str) or "case_sha256" not in attrs:
        raise CaseError(str(run), "--again", "is not a layers run (no case text)")
    if hashlib.sha256(text.encode("utf-8")).hexdigest() != attrs["case_sha256"]:
        raise CaseError(str(run), "case", "the stored case text does not match its case_sha256")
    try:
        series_name = (tomllib.loads(text).get("series") or {}).get("file")
    except tomllib.TOMLDecodeError:
        raise CaseError(str(run), "case", "the stored case text is not valid TOML") from None
    if series_name is not None and not isinstance(series_name, str):
        raise CaseError(str(run), "case", "series.file in the stored case text is not a file name")
    folder = Path(tempfile.mkdtemp(prefix="layers-again-"))
    try:
        case_name = private_name(attrs.get("case_file", "case.toml"), "case.toml")
        case_path = _write_private(folder, case_name, text.encode("utf-8"))
        source = None
        if series_name:
            data, source = _series_bytes(run, attrs, series_name, series_dirs)
            _write_private(folder, private_name(series_name, "series.csv"), data)
        case = load_case(case_path, series_dir=folder)
    finally:
        shutil.rmtree(folder, ignore_errors=True)
    case.label = str(attrs.get("label", ""))
    # The re-run records where it came from (by name), not the private folder it ran in.
    case.provenance = {"rerun_of": run.name, "rerun_of_sha256": _sha256_file(run)}
    for key in ("case_file", "case_path", "series_path"):
        if key in attrs:
            case.provenance[key] = str(attrs[key])
    if source is not None:
        case.provenance["series_source"] = source
    return case


def _sha256_file(path: Path) -> str:
    digest = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def _series_bytes(run: Path, attrs: dict, series_name: str, series_dirs: tuple[Path, ...]) -> tuple[bytes, str]:
    """The bytes of the run's series, checked against its SHA-256, and where they came from."""
    expected = attrs.get("series_sha256")
    embedded = attrs.get("series_embedded")
    if isinstance(embedded, str):
        data = embedded.encode("utf-8")
        if hashlib.sha256(data).hexdigest() != expected:
            raise CaseError(str(run), "series_embedded", "the embedded series does not match its series_sha256")
        return data, "the copy embedded in the run"
    name = base_name(series_name)
    candidates = [run.parent / name, *(Path(d) / name for d in series_dirs)]
    # the usual layout: runs in runs/, the case and its series in a folder beside it
    # (cases/), the command given from the project folder; a copy is used only
    # when its SHA-256 is the run's
    here = Path.cwd()
    candidates.append(here / name)
    try:
        candidates += sorted(p / name for p in here.iterdir() if p.is_dir() and not p.name.startswith("."))
    except OSError:
        pass
    # Older runs (and runs made with --record-paths) say where the files were;
    # these are only read, and only used when their hash matches.
    recorded = str(attrs.get("series_path", ""))
    if recorded:
        candidates.append(Path(recorded))
    if attrs.get("case_path"):
        candidates.append(Path(str(attrs["case_path"])).parent / series_name)
    changed = None
    for path in candidates:
        try:
            if not path.is_file():
                continue
            data = path.read_bytes()
        except OSError:
            continue
        if hashlib.sha256(data).hexdigest() == expected:
            return data, f"{path} (unchanged: SHA-256 checked)"
        changed = changed or path
    if changed is not None:
        raise CaseError(str(run), "series", f"{changed} has changed since the run (SHA-256 differs)")
    raise CaseError(
        str(run), "series",
        f"the series {name} was not embedded and is not beside the run, in this folder or in a folder within it; "
        "give its folder with --series-dir DIR",
    )
