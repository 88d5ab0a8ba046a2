"""Command line: argument parsing and error presentation only.

Every user-facing problem is a :class:`~roamstat.errors.RoamstatError`,
printed as ``roamstat: error: <message>`` with exit status 2.  Anything else
is a bug: exit status 1 and a pointer to ``--debug``, which shows the
traceback.
"""

from __future__ import annotations

import argparse
import sys
import warnings
from collections import Counter

from roamstat import __version__
from roamstat.config import NULL_MODELS, Config
from roamstat.errors import RoamstatError

COMMANDS = {
    "inspect": "print what roamstat detects in the files (columns, animals, schedule, projection); writes nothing",
    "clean": "screen fixes: fixes.csv and rejected.csv (a reason for every dropped row)",
    "steps": "clean, then step lengths and turning angles: steps.csv and summary.csv",
    "fit": "steps, then step-length and turning-angle models: fits.csv",
    "nulltest": "fit, then random-walk null models and displacement tests: null_tests.csv",
    "ranges": "steps, then residency classes and MCP/KDE home ranges: residency.csv, ranges.csv, ranges.geojson",
    "run": "the whole job: every table, report.html with figures, manifest.json",
}


def _input_options() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(add_help=False)
    p.add_argument("files", nargs="+", metavar="FILE", help="CSV or GPX files of collar fixes")
    g = p.add_argument_group("columns (detected automatically; override when detection is wrong)")
    g.add_argument("--id-col", help="column holding the animal id")
    g.add_argument("--time-col", help="column holding the fix time (or the date, with --date-col)")
    g.add_argument("--date-col", help="column holding the date when time of day is in --time-col")
    g.add_argument("--lat-col", help="latitude column (decimal degrees, WGS84)")
    g.add_argument("--lon-col", help="longitude column (decimal degrees, WGS84)")
    g.add_argument("--x-col", help="easting column of projected input (with --y-col and --crs)")
    g.add_argument("--y-col", help="northing column of projected input")
    g.add_argument("--crs", help="EPSG:NNNN of projected input, or the planar frame to use for every animal")
    g.add_argument("--tz", default="UTC", help="time zone of times without an offset (default UTC)")
    s = p.add_argument_group("screening")
    s.add_argument("--max-dop", type=float, help="reject fixes with DOP above this (needs a DOP column)")
    s.add_argument("--require-3d", action="store_true", help="reject 2-D fixes (needs a fix-type column)")
    s.add_argument("--max-speed", type=float, metavar="M_S", help="reject fixes implying a speed above this (m/s)")
    s.add_argument("--spike-speed", type=float, metavar="M_S", help="speed in and out that marks an out-and-back spike (default: from the animal's own speeds)")
    s.add_argument("--min-quality", help="lowest accepted location-quality class (3, 2, 1, 0, A, B, Z)")
    s.add_argument("--keep", action="append", default=[], metavar="REASON",
                   help="switch a screening rule off by its reason code (repeatable), e.g. --keep spike")
    t = p.add_argument_group("schedule and segments")
    t.add_argument("--max-gap", help="split tracks at gaps longer than this (e.g. 12h; default 5x the fix interval)")
    t.add_argument("--resample", metavar="INTERVAL", help="interpolate onto a regular grid within segments (e.g. 1h)")
    return p


def _analysis_options() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(add_help=False)
    g = p.add_argument_group("models and null tests")
    g.add_argument("--min-step", type=float, default=0.0, metavar="M", help="leave steps of at most this length (m) out of step-length fits")
    g.add_argument("--bootstrap", type=int, default=0, metavar="N", help="parametric-bootstrap replicates for parameter intervals")
    g.add_argument("--null", default=",".join(NULL_MODELS), help=f"null models, comma-separated (default {','.join(NULL_MODELS)})")
    g.add_argument("--replicates", type=int, default=999, metavar="M", help="simulated walks per animal and null (default 999)")
    g.add_argument("--seed", type=int, default=Config.seed, help=f"run seed (default {Config.seed})")
    g.add_argument("--alpha", type=float, default=0.05, help="significance level for verdicts, on q-values (default 0.05)")
    g.add_argument("--uere", type=float, metavar="M", help="user-equivalent range error (m): location error SD = DOP x M")
    g.add_argument("--error-classes", metavar="CSV", help="location-quality class -> error SD (m) table, overriding the default")
    r = p.add_argument_group("home ranges")
    r.add_argument("--kde-bandwidth", type=float, metavar="M", help="kernel bandwidth in metres (default: reference bandwidth)")
    r.add_argument("--mask-locations", action="store_true", help="publish coordinates relative to a hidden origin (sensitive species)")
    r.add_argument("--mask-grid", type=float, metavar="M", help="with --mask-locations, also coarsen coordinates to this grid (m)")
    return p


def _positive(value, option: str):
    if value is not None and not (value > 0 and value < float("inf")):
        raise RoamstatError(f"{option} {value}: give a positive number of metres, e.g. 5")
    return value


def _output_options() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(add_help=False)
    g = p.add_argument_group("output and execution")
    g.add_argument("--out", required=True, metavar="DIR", help="output folder")
    g.add_argument("--force", action="store_true", help="write into a non-empty folder that is not an earlier roamstat output")
    g.add_argument("--format", choices=("csv", "parquet"), default="csv", help="table format (parquet needs pyarrow)")
    g.add_argument("--workers", default="1", help="worker processes, or 'auto' for all cores (default 1)")
    g.add_argument("--scheduler", metavar="tcp://HOST:PORT", help="run per-animal work on an existing Dask cluster")
    g.add_argument("--low-memory", action="store_true",
                   help="read in chunks and work a batch of animals at a time (big deployments; same tables)")
    g.add_argument("--no-report", action="store_true", help="skip figures and report.html")
    g.add_argument("--quiet", action="store_true", help="no progress bar or closing summary")
    return p


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="roamstat",
        description="Screen GPS collar fixes, measure steps and turns, test net displacement against "
        "random-walk null models and seed home-range studies.",
    )
    parser.add_argument("--version", action="version", version=f"roamstat {__version__}")
    parser.add_argument("--debug", action="store_true", help="show the traceback of unexpected errors")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", required=True)
    inputs, analysis, output = _input_options(), _analysis_options(), _output_options()
    for name, help_text in COMMANDS.items():
        parents = [inputs] if name == "inspect" else [inputs, analysis, output]
        cmd = sub.add_parser(name, parents=parents, help=help_text, description=help_text)
        cmd.add_argument("--debug", action="store_true", default=argparse.SUPPRESS, help=argparse.SUPPRESS)
    return parser


def config_from_args(args: argparse.Namespace) -> Config:
    """Build the frozen run configuration from parsed arguments."""
    from roamstat.parallel import resolve_workers

    values = dict(
        id_col=args.id_col, time_col=args.time_col, date_col=args.date_col, lat_col=args.lat_col,
        lon_col=args.lon_col, x_col=args.x_col, y_col=args.y_col, crs=args.crs, tz=args.tz,
        max_dop=args.max_dop, require_3d=args.require_3d, max_speed=args.max_speed,
        spike_speed=args.spike_speed, min_quality=args.min_quality, disabled_rules=tuple(args.keep),
        max_gap=args.max_gap, resample=args.resample,
    )
    if args.command != "inspect":
        nulls = tuple(n.strip() for n in args.null.split(",") if n.strip())
        unknown = [n for n in nulls if n not in NULL_MODELS]
        if unknown or not nulls:
            raise RoamstatError(f"--null {args.null!r}: choose from {','.join(NULL_MODELS)}")
        if args.replicates < 19:
            raise RoamstatError(f"--replicates {args.replicates}: use at least 19 (999 is the default)")
        if not 0 < args.alpha < 1:
            raise RoamstatError(f"--alpha {args.alpha}: give a level between 0 and 1, e.g. 0.05")
        values.update(
            min_step=args.min_step, bootstrap=args.bootstrap, nulls=nulls, replicates=args.replicates,
            seed=args.seed, alpha=args.alpha, kde_bandwidth=args.kde_bandwidth,
            mask_locations=args.mask_locations or args.mask_grid is not None, mask_grid=args.mask_grid,
            workers=resolve_workers(args.workers), scheduler=args.scheduler,
            report=not args.no_report, quiet=args.quiet, force=args.force, output_format=args.format,
            low_memory=args.low_memory, uere_m=_positive(args.uere, "--uere"), error_class_table=args.error_classes,
        )
    return Config(**values)


def main(argv: list[str] | None = None) -> int:
    argv = list(sys.argv[1:] if argv is None else argv)
    parser = build_parser()
    args = parser.parse_args(argv)
    if not args.debug:
        # Edge cases (a zero-variance fit, a divergent moment) are handled where they arise and
        # reported in the tables' notes; numpy's floating-point chatter would only alarm users.
        warnings.simplefilter("ignore", RuntimeWarning)
    try:
        return _dispatch(args, argv)
    except RoamstatError as exc:
        print(f"roamstat: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("roamstat: interrupted; outputs already written are complete, the rest were not written", file=sys.stderr)
        return 130
    except Exception as exc:  # a bug, not bad input
        if args.debug:
            raise
        print(f"roamstat: internal error: {type(exc).__name__}: {exc} "
              "(this is a bug; rerun with --debug for the traceback and report it)", file=sys.stderr)
        return 1


def _dispatch(args: argparse.Namespace, argv: list[str]) -> int:
    cfg = config_from_args(args)
    if args.command == "inspect":
        from roamstat.inspect import inspect_text

        print(inspect_text(args.files, cfg))
        return 0
    from roamstat.run import run_command

    result = run_command(args.command, args.files, args.out, cfg, argv)
    if not cfg.quiet:
        print(closing_summary(result), file=sys.stderr)
    return 0


def closing_summary(result) -> str:
    loaded = result.loaded
    lines = [
        f"roamstat: {loaded.read.n_read} rows read, {loaded.n_kept()} fixes kept, "
        f"{len(loaded.rejected)} rejected (see rejected.csv); outputs in {result.out_dir}",
    ]
    null_tests = result.tables.get("null_tests")
    if null_tests is not None and len(null_tests):
        for null, group in null_tests.groupby("null_model", sort=False):
            counts = Counter(group["verdict"])
            lines.append(f"  {null}: " + ", ".join(f"{v} {counts[v]}" for v in ("farther", "closer", "consistent", "insufficient") if counts[v]))
    if (result.out_dir / "report.html").exists() and "report" in {s["stage"] for s in result.stages}:
        lines.append(f"  report: {result.out_dir / 'report.html'}")
    return "\n".join(lines)


if __name__ == "__main__":
    sys.exit(main())
