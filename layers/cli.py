"""Command line: parse arguments, call the library, print, set the exit status.

Exit status: 0 success, 1 a criterion failed where that is the question,
2 bad input (one line naming the file, the key and the reason), 3 internal
error.
"""

from __future__ import annotations

import argparse
import contextlib
import os
import sys
import warnings
from collections.abc import Sequence
from pathlib import Path

from layers.about import CAUTION, __version__
from layers.errors import CaseError

EXIT_OK, EXIT_FAILED, EXIT_INPUT, EXIT_INTERNAL = 0, 1, 2, 3


def _err(message: str) -> None:
    print(f"layers: {message}", file=sys.stderr)


class _Progress:
    """A tqdm bar on a terminal; nothing otherwise."""

    def __init__(self, quiet: bool, desc: str) -> None:
        self.bar = None
        if not quiet and sys.stderr.isatty():
            from tqdm import tqdm

            # delay: runs shorter than about a second show no bar at all
            self.bar = tqdm(total=0, desc=desc, unit="step", leave=False, file=sys.stderr, mininterval=0.5, delay=1.0)

    def __call__(self, done: int, total: int) -> None:
        if self.bar is not None:
            if self.bar.total != total:
                self.bar.total = total
            self.bar.n = done
            self.bar.refresh()

    def close(self) -> None:
        if self.bar is not None:
            self.bar.close()


def _say_warnings(args: argparse.Namespace) -> None:
    """Print the warnings so far (those of reading the case: a key without
    effect, a swept case run as written) before a long computation, not after it."""
    for w in getattr(args, "caught", ()):
        text = str(w.message)
        if issubclass(w.category, (RuntimeWarning, DeprecationWarning)) or text in args.warned:
            continue
        args.warned.add(text)
        _err(f"warning: {text}")


def _print_written(written, extra, cautions: list[str]) -> None:
    """Where a result went (the archive, and -o), then its cautions."""
    print(f"archived: {written}")
    if extra:
        print(f"written:  {extra}")
    for line in cautions:
        print(f"caution: {line}")


def cmd_run(args: argparse.Namespace) -> int:
    from layers.api import run_case
    from layers.case import load_case
    from layers.report import run_cautions, run_summary
    from layers.results import FieldSink, archive, archive_dir, refuse_existing, usable_folder, write_output

    refuse_existing(args.out)
    usable_folder(archive_dir(args.archive), make=False)
    if args.again and args.case:
        raise CaseError("(command line)", "--again", f"give a case file or --again RUN.nc, not both (got {args.case})")
    if args.again:
        from layers.provenance import load_archived_case

        case = load_archived_case(args.again, tuple(Path(d) for d in args.series_dir or ()))
    elif args.case:
        case = load_case(args.case)
    else:
        raise CaseError("(command line)", "CASE", "give a case file, or --again RUN.nc")
    if args.series_dir and not args.again:
        raise CaseError("(command line)", "--series-dir", "is for --again RUN.nc (a case file names its own series)")
    if args.label:
        case.label = args.label
    if case.sweep:
        warnings.warn(f"{case.path}: has [[sweep]] tables; `layers run` runs the case as written, `layers sweep` runs every point",
                      UserWarning, stacklevel=1)
    case.record_paths = bool(args.record_paths)
    if (args.workers is not None or args.scheduler) and case.uncertainty is None:
        raise CaseError(case.path, "uncertainty", "--workers and --scheduler run the samples of [uncertainty]; this case has none")
    _say_warnings(args)
    # the cell fields go to a scratch file as the march makes them and from there,
    # block by block, into the archive: memory stays flat however long the run
    sink = None
    try:
        with _cluster_client(args) as client:
            progress = _Progress(args.quiet, case.stem)
            sink = FieldSink(case.mesh()) if case.time.keep_temperature is not False else None
            try:
                ds = run_case(case, progress=progress, field_sink=sink, client=client)
            finally:
                progress.close()
        import shlex

        ds.attrs["command"] = "layers " + shlex.join(args.argv)
        written = archive(ds, case.stem, args.archive)
        extra = write_output(ds, args.out)
    finally:
        if sink is not None:
            sink.close()
    if not args.quiet:
        if case.provenance:
            print(f"re-run of {case.provenance['rerun_of']} from its archived case text"
                  + (f"; series from {case.provenance['series_source']}" if "series_source" in case.provenance else ""))
        print(run_summary(ds, case))
    # Even a quiet run says where its result went, and keeps the caution.
    _print_written(written, extra, run_cautions(ds, case))
    return EXIT_OK


def cmd_size(args: argparse.Namespace) -> int:
    import math

    from layers.case import load_case
    from layers.results import archive, archive_dir, refuse_existing, usable_folder, write_output
    from layers.sizing import cautions, criteria_table, sizing_table

    refuse_existing(args.out)
    usable_folder(archive_dir(args.archive), make=False)
    case = load_case(args.case)
    if case.sizing is None:
        raise CaseError(case.path, "sizing", "is required by 'layers size' (add a [sizing] table)")
    if case.sweep:
        warnings.warn(f"{case.path}: has [[sweep]] tables; `layers size` sizes the case as written", UserWarning, stacklevel=1)
    _say_warnings(args)
    progress = _Progress(args.quiet, f"{case.stem} sizing")
    try:
        ds = sizing_table(case, progress=progress)  # printed and archived without xarray (a short command)
    finally:
        progress.close()
    written = archive(ds, f"{case.stem}-size", args.archive)
    extra = write_output(ds, args.out)
    layer = case.sizing.layer
    print(f"{case.title}: sizing layer {case.sizing.listed} ({case.layers[layer - 1].name})")
    print(f"design conditions: {ds.attrs['design_conditions']}")
    print(criteria_table(ds))
    rec = ds.attrs["recommended_thickness"]
    if math.isfinite(rec):
        print(f"recommended: {rec * 1000:g} mm, the thinnest candidate that meets every criterion")
    else:
        print("no candidate thickness meets every criterion")
    if "recommended_thickness_at_confidence" in ds.attrs:
        at = float(ds.attrs["recommended_thickness_at_confidence"])
        share = f"{100 * float(ds.attrs['confidence']):g} %"
        n = ds.attrs["uncertainty_samples"]
        print(f"with the input tolerances of [uncertainty] ({n} samples): "
              + (f"{at * 1000:g} mm is the thinnest candidate that meets every criterion in at least {share} of them"
                 if math.isfinite(at) else f"no candidate meets every criterion in {share} of them"))
    print(f"archived: {written}")
    if extra:
        print(f"written:  {extra}")
    for line in cautions(case):
        print(f"caution: {line}")
    return EXIT_OK if math.isfinite(rec) else EXIT_FAILED


def cmd_condensation(args: argparse.Namespace) -> int:
    """``layers condensation CASE [-o OUT.nc] [--archive DIR]``: ISO 13788 monthly method; exit 1 when moisture accumulates."""
    from layers.api import condensation
    from layers.case import load_case
    from layers.iso13788 import CAUTION_GLASER, VERDICTS, condensation_table, summary_lines
    from layers.results import archive, archive_dir, refuse_existing, usable_folder, write_output

    refuse_existing(args.out)
    usable_folder(archive_dir(args.archive), make=False)
    case = load_case(args.case)
    _say_warnings(args)
    ds = condensation(case)
    written = archive(ds, f"{case.stem}-condensation", args.archive)
    extra = write_output(ds, args.out)
    print(f"{case.title}: ISO 13788 monthly interstitial condensation")
    print(condensation_table(ds))
    for line in summary_lines(ds):
        print(line)
    print(f"archived: {written}")
    if extra:
        print(f"written:  {extra}")
    print(f"caution: {CAUTION_GLASER}")
    print(f"caution: {CAUTION}")
    return EXIT_FAILED if ds.attrs["verdict"] == VERDICTS[2] else EXIT_OK


#: Most local worker processes ``--workers`` starts.
MAX_WORKERS = 64


def _client(args: argparse.Namespace):
    """A dask.distributed client for ``--workers N`` (a local cluster of N
    processes) or ``--scheduler ADDRESS`` (an existing cluster); None: serial."""
    if args.workers is not None and args.scheduler:
        raise CaseError("(command line)", "--workers", "give --workers N or --scheduler ADDRESS, not both")
    if args.workers is None and not args.scheduler:
        return None, None
    try:
        from dask.distributed import Client, LocalCluster
    except ImportError:
        option = "--workers" if args.workers is not None else "--scheduler"
        raise CaseError("(command line)", option, "needs dask.distributed, which is not installed: pip install \"layers[cluster]\"") from None

    if args.workers is not None:
        if not 1 <= args.workers <= MAX_WORKERS:
            raise CaseError("(command line)", "--workers", f"must be from 1 to {MAX_WORKERS}, got {args.workers}")
        cluster = LocalCluster(n_workers=args.workers, threads_per_worker=1, processes=True, dashboard_address=None)
        return Client(cluster), cluster
    try:
        return Client(args.scheduler, timeout="15s"), None
    except (OSError, TimeoutError, ValueError) as exc:
        raise CaseError("(command line)", "--scheduler", f"cannot reach the scheduler at {args.scheduler!r} ({exc})") from None


@contextlib.contextmanager
def _cluster_client(args: argparse.Namespace):
    """The dask client of ``--workers`` / ``--scheduler`` (None without them),
    closed with its local cluster when the block ends."""
    client, cluster = _client(args)
    try:
        yield client
    finally:
        if client is not None:
            client.close()
        if cluster is not None:
            cluster.close()


def cmd_sweep(args: argparse.Namespace) -> int:
    import shlex

    from layers.case import load_case
    from layers.report import run_cautions, sweep_summary
    from layers.results import archive, archive_dir, refuse_existing, usable_folder, write_output
    from layers.sweeps import sweep

    refuse_existing(args.out)
    usable_folder(archive_dir(args.archive), make=False)
    case = load_case(args.case)
    if not case.sweep:
        raise CaseError(case.path, "sweep", "is required by 'layers sweep' (add one or more [[sweep]] tables)")
    case.record_paths = bool(args.record_paths)
    _say_warnings(args)
    with _cluster_client(args) as client:
        progress = _Progress(args.quiet, f"{case.stem} sweep")
        try:
            ds = sweep(case, client=client, progress=progress)
        finally:
            progress.close()
    ds.attrs["command"] = "layers " + shlex.join(args.argv)
    written = archive(ds, f"{case.stem}-sweep", args.archive)
    extra = write_output(ds, args.out)
    if not args.quiet:
        print(sweep_summary(ds, case))
    _print_written(written, extra, run_cautions(ds, case))
    return EXIT_OK


def cmd_check(args: argparse.Namespace) -> int:
    from layers.case import load_case
    from layers.report import check_report

    case = load_case(args.case)
    report = check_report(case)
    if case.sweep:  # every point read, as layers sweep would
        from layers.sweeps import check_points, points

        report += f"\nsweep points checked: {check_points(case, points(case))}"
    if case.uncertainty is not None:
        from layers.uncertainty import check_samples

        report += f"\nuncertainty samples checked: {check_samples(case)}"
    print(report)
    return EXIT_OK


def cmd_materials(args: argparse.Namespace) -> int:
    from layers.report import materials_table

    text, count = materials_table(args.word)
    if count == 0:
        print(f"no material matches {args.word!r}")
        return EXIT_FAILED
    print(text)
    return EXIT_OK


def cmd_periodic(args: argparse.Namespace) -> int:
    """``layers periodic CASE [--period 24h] [-o OUT.nc]``."""
    from layers.case import load_case
    from layers.report import periodic_dataset, periodic_report
    from layers.results import refuse_existing, write_output
    from layers.units import parse_period

    refuse_existing(args.out)
    case = load_case(args.case)
    if case.sweep or case.uncertainty is not None:
        warnings.warn(f"{case.path}: `layers periodic` characterises the case as written; its [[sweep]] or [uncertainty] "
                      "tables apply to run, sweep and size", UserWarning, stacklevel=1)
    period = parse_period(args.period, file="(command line)", key="--period")
    report = periodic_report(case, period)
    print(report.text)
    written = write_output(periodic_dataset(case, report), args.out)
    if written:
        print(f"written: {written}")
    print(f"caution: {CAUTION}")
    return EXIT_OK


def cmd_plot(args: argparse.Namespace) -> int:
    """``layers plot RUN.nc [-o OUT] [--kind ...] [--times ...] [--variable NAME] [--from WHEN] [--to WHEN]``."""
    from layers.plots import plot_file

    written = plot_file(args.run, args.kind, args.out, getattr(args, "times", None), getattr(args, "variable", None),
                        getattr(args, "start", None), getattr(args, "end", None))
    print(f"written: {written}")
    return EXIT_OK


def cmd_compare(args: argparse.Namespace) -> int:
    """``layers compare RUN_A RUN_B [...] [-o OUT.png|.svg|.pdf|.nc]``."""
    from layers.comparison import check_comparison_output, compare_runs, compare_sweeps, format_comparison, is_sweep_file, write_comparison

    if any(Path(p).is_file() and is_sweep_file(p) for p in args.runs):
        if args.out:
            raise CaseError(str(args.out), "-o", "a comparison of sweeps is printed only; map each sweep with `layers plot`")
        print(compare_sweeps(args.runs))
        print(f"caution: {CAUTION}")
        return EXIT_OK
    if args.out:
        check_comparison_output(args.out)
    comparison = compare_runs(args.runs)
    print(format_comparison(comparison))
    if args.out:
        print(f"written: {write_comparison(comparison, args.out)}")
    print(f"caution: {CAUTION}")
    return EXIT_OK


def cmd_report(args: argparse.Namespace) -> int:
    """``layers report RUN.nc [RUN2.nc ...] [-o OUT.html]``."""
    from layers.html_report import write_report

    written = write_report(args.runs, args.out, tuple(args.series_dir or ()))
    print(f"written: {written.path}")
    for line in written.cautions:
        print(f"caution: {line}")
    return EXIT_OK


def cmd_verify(args: argparse.Namespace) -> int:
    """``layers verify [-o OUT.html] [--markdown FILE.md]``: the shipped checks against published sources.

    Exit 0 when every check passes, 1 when one fails, 2 for an output that would overwrite a file.
    """
    import time

    from layers import verification
    from layers.results import refuse_existing

    refuse_existing(args.out, suffixes=(".html", ".htm"))
    if args.markdown:
        verification.check_markdown_target(args.markdown)
    terminal = sys.stderr.isatty() and not args.quiet

    def progress(done: int, total: int, result) -> None:
        if terminal:
            verdict = "pass" if result.passed else "FAIL"
            print(f"[{done:2d}/{total}] {verdict}  {result.check.id} ({result.seconds:.1f} s)", file=sys.stderr, flush=True)

    start = time.perf_counter()
    results = verification.run_checks(progress=progress)
    seconds = time.perf_counter() - start
    print(verification.text_report(results))
    print(f"time: {seconds:.1f} s")
    if args.out:
        print(f"written: {verification.write_html(args.out, results, seconds=seconds)}")
    if args.markdown:
        print(f"written: {verification.write_markdown(args.markdown, results)}")
    return EXIT_OK if all(r.passed for r in results) else EXIT_FAILED


def cmd_list(args: argparse.Namespace) -> int:
    """``layers list [DIR] [--json]``."""
    import json

    from layers.catalogue import format_list, list_footer, list_runs
    from layers.results import archive_dir

    folder = args.dir or archive_dir(None)
    entries = list_runs(folder)
    if args.json:
        print(json.dumps([e.to_json() for e in entries], indent=1))
    elif not entries:
        print(f"no runs in {folder}")
    else:
        print(format_list(entries))
        print(list_footer(entries, folder))
    return EXIT_OK


def build_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="layers",
        description="Transient heat analysis of layered walls, roofs and insulated pipes.",
    )
    p.add_argument("--version", action="version", version=f"layers {__version__}")
    sub = p.add_subparsers(dest="command", required=True, metavar="COMMAND")

    r = sub.add_parser("run", help="run a case and archive the result")
    r.add_argument("case", nargs="?", help="case file (TOML)")
    r.add_argument("--again", metavar="RUN.nc", help="re-run the case archived in a run file")
    r.add_argument("-o", "--out", help="also write the result to this netCDF file (never overwritten)")
    r.add_argument("--archive", help="archive folder (default: $LAYERS_ARCHIVE or runs/)")
    r.add_argument("--label", help="a label stored with the run")
    r.add_argument("--series-dir", action="append", metavar="DIR", help="with --again: a folder to look in for the series (repeatable)")
    r.add_argument("--record-paths", action="store_true", help="record the absolute paths of the case and series files in the run")
    r.add_argument("-q", "--quiet", action="store_true", help="no progress bar and no summary (the file written and the caution are still printed)")
    r.add_argument("--workers", type=int, metavar="N", help="[uncertainty]: run the samples on a local dask cluster of N worker processes")
    r.add_argument("--scheduler", metavar="ADDRESS", help="[uncertainty]: run the samples on an existing dask cluster")
    r.set_defaults(func=cmd_run)

    w = sub.add_parser("sweep", help="one run per point of [[sweep]], as one result")
    w.add_argument("case", help="case file (TOML) with [[sweep]] tables")
    w.add_argument("-o", "--out", help="also write the result to this netCDF file (never overwritten)")
    w.add_argument("--archive", help="archive folder (default: $LAYERS_ARCHIVE or runs/)")
    w.add_argument("--workers", type=int, metavar="N", help="run on a local dask cluster of N worker processes")
    w.add_argument("--scheduler", metavar="ADDRESS", help="run on an existing dask cluster (e.g. tcp://10.0.0.5:8786)")
    w.add_argument("--record-paths", action="store_true", help="record the absolute paths of the case and series files")
    w.add_argument("-q", "--quiet", action="store_true", help="no progress bar and no summary")
    w.set_defaults(func=cmd_sweep)

    c = sub.add_parser("check", help="validate a case; print the mesh and the plan")
    c.add_argument("case")
    c.set_defaults(func=cmd_check)

    s = sub.add_parser("size", help="insulation sizing (needs [sizing])")
    s.add_argument("case")
    s.add_argument("-o", "--out")
    s.add_argument("--archive", help="archive folder (default: $LAYERS_ARCHIVE or runs/)")
    s.add_argument("-q", "--quiet", action="store_true", help="no progress bar")
    s.set_defaults(func=cmd_size)

    co = sub.add_parser("condensation", help="ISO 13788 monthly interstitial condensation (needs [condensation])")
    co.add_argument("case")
    co.add_argument("-o", "--out", help="also write the result to this netCDF file (never overwritten)")
    co.add_argument("--archive", help="archive folder (default: $LAYERS_ARCHIVE or runs/)")
    co.set_defaults(func=cmd_condensation)

    d = sub.add_parser("periodic", help="ISO 13786 dynamic thermal characteristics")
    d.add_argument("case")
    d.add_argument("--period", default="24 h", help="period of the cycle (default 24 h)")
    d.add_argument("-o", "--out")
    d.set_defaults(func=cmd_periodic)

    pl = sub.add_parser("plot", help="plot a run, sizing or sweep file")
    pl.add_argument("run", help="a run's netCDF file (or one from layers size or layers sweep)")
    pl.add_argument("-o", "--out")
    pl.add_argument("--kind", default=None, help="default: sweep for a sweep file, sizing for a sizing file, else surfaces",
                    choices=["carpet", "surfaces", "profiles", "sizing", "sweep", "condensation"])
    pl.add_argument("--times", nargs="*", help="profiles: times to draw (ISO 8601)")
    pl.add_argument("--variable", metavar="NAME", help="sweep: the result per point to map (default heat_flow_inside_mean)")
    pl.add_argument("--from", dest="start", metavar="WHEN", help="surfaces: first time to draw (ISO 8601, UTC)")
    pl.add_argument("--to", dest="end", metavar="WHEN", help="surfaces: last time to draw (ISO 8601, UTC)")
    pl.set_defaults(func=cmd_plot)

    cp = sub.add_parser("compare", help="compare runs side by side")
    cp.add_argument("runs", nargs="+")
    cp.add_argument("-o", "--out", help="overlay plot (PNG, SVG, PDF) or combined Dataset (.nc)")
    cp.set_defaults(func=cmd_compare)

    rp = sub.add_parser("report", help="a calculation report for a client (one self-contained HTML page)")
    rp.add_argument("runs", nargs="+", metavar="RUN.nc", help="result files of run, size, periodic, sweep or condensation")
    rp.add_argument("-o", "--out", help="the page (.html; default <first file's stem>-report.html here; never overwritten)")
    rp.add_argument("--series-dir", action="append", metavar="DIR",
                    help="a folder to look in for the cases' series files, to describe the inputs (repeatable)")
    rp.set_defaults(func=cmd_report)

    ls = sub.add_parser("list", help="list the archived runs")
    ls.add_argument("dir", nargs="?")
    ls.add_argument("--json", action="store_true")
    ls.set_defaults(func=cmd_list)

    m = sub.add_parser("materials", help="the material library")
    m.add_argument("word", nargs="?")
    m.set_defaults(func=cmd_materials)

    vf = sub.add_parser("verify", help="re-run the checks against published sources")
    vf.add_argument("-o", "--out", metavar="OUT.html", help="also write the checks as an HTML page (never overwritten)")
    vf.add_argument("--markdown", metavar="FILE.md", help="write the table as Markdown: a new file, or regenerate the "
                    "section between the `layers verify` markers of an existing one (docs/validation.md)")
    vf.add_argument("-q", "--quiet", action="store_true", help="no progress lines")
    vf.set_defaults(func=cmd_verify)
    return p


def _stop_cleanly_on_sigterm() -> None:
    """A terminated run (``kill``, a batch system's time limit) unwinds like an
    interrupted one: scratch files are removed and nothing half-written is kept."""
    import signal
    import threading

    if threading.current_thread() is not threading.main_thread():
        return

    def stop(signum, frame):
        raise KeyboardInterrupt

    try:
        signal.signal(signal.SIGTERM, stop)
    except (ValueError, OSError):  # not possible here (an embedded interpreter)
        pass


def main(argv: Sequence[str] | None = None) -> int:
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # argparse: usage errors exit 2 already
        return int(exc.code or 0)
    args.argv = list(argv) if argv is not None else sys.argv[1:]
    debug = bool(os.environ.get("LAYERS_DEBUG"))
    _stop_cleanly_on_sigterm()
    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("default")
            refused = False
            seen: set[str] = set()
            args.caught, args.warned = caught, seen  # _say_warnings prints those of reading the case before the work
            try:
                return int(args.func(args))
            except CaseError:
                refused = True
                raise
            finally:
                for w in caught:
                    text = str(w.message)
                    # a refusal is one line: the warnings that led up to it (a key without
                    # effect, overflow) are beside the point of what must be corrected
                    if refused:
                        continue
                    if text not in seen and not issubclass(w.category, DeprecationWarning):
                        seen.add(text)
                        _err(f"warning: {text}")
    except CaseError as exc:
        _err(str(exc))
        return EXIT_INPUT
    except KeyboardInterrupt:
        _err("interrupted; nothing was written")
        return 130
    except BrokenPipeError:
        # The reader went away (`layers list | head`): stop quietly, as Unix
        # tools do, with 128 + SIGPIPE; silence the flush at interpreter exit.
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return 141
    except Exception as exc:  # noqa: BLE001 - last line of defence: no traceback for users
        if debug:
            raise
        _err(f"internal error: {type(exc).__name__}: {exc} (set LAYERS_DEBUG=1 for a traceback)")
        return EXIT_INTERNAL


if __name__ == "__main__":
    sys.exit(main())
