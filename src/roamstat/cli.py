"""Command line: argument parsing and error presentation only.

Every user-facing problem is a :class:`~roamstat.errors.RoamstatError`,
printed as ``roamstat: error: <message>`` with exit status 2.  Anything else
is a bug: exit status 1 and a pointer to ``--debug``, which shows the
traceback.
"""

from __future__ import annotations

import argparse
import dataclasses
import difflib
import logging
import signal
import sys
import warnings
from collections import Counter

from roamstat import __version__
from roamstat.config import DEFAULT_NULLS, MIN_REPLICATES, Config, check_config
from roamstat.errors import RoamstatError, Stopped
from roamstat.registry import NULLS
from roamstat.shown import shown

COMMANDS = {
    "inspect": "print what roamstat detects in the files (columns, animals, schedule, projection); writes nothing",
    "clean": "screen fixes: fixes.csv and rejected.csv (a reason for every dropped row)",
    "steps": "clean, then step lengths and turning angles: steps.csv and summary.csv",
    "fit": "steps, then step-length and turning-angle models and continuous-time motion models: fits.csv, "
           "motion_models.csv, track_smoothed.csv",
    "states": "steps, then hidden Markov models of behavioural states: states.csv, state_models.csv",
    "nulltest": "fit, then random-walk null models and displacement tests: null_tests.csv",
    "ranges": "steps, then motion models, residency classes and home ranges (MCP, KDE, autocorrelation-aware): "
              "motion_models.csv, track_smoothed.csv, residency.csv, ranges.csv, ranges.geojson",
    "run": "the whole job: every table, report.html with figures, manifest.json",
}

# Which commands use an option: each command's --help lists only the options that change its outputs.
_WRITING = frozenset(COMMANDS) - {"inspect"}
_FITTING = frozenset({"fit", "nulltest", "run"})
_TESTING = frozenset({"nulltest", "run"})
_RANGING = frozenset({"ranges", "run"})
_STATING = frozenset({"states", "nulltest", "run"})  # nulltest fits states for --null states
_PER_ANIMAL = _FITTING | _RANGING | _STATING


def _nulls_help() -> str:
    return (f"null models, comma-separated (default {','.join(DEFAULT_NULLS)}): {NULLS.help_lines()}")


#: (group, option, argparse keywords, commands that use it); groups appear in this order.
_OPTIONS = (
    ("columns (detected automatically; override when detection is wrong)", (
        ("--id-col", dict(help="column holding the animal id")),
        ("--time-col", dict(help="column holding the fix time (or the date, with --date-col)")),
        ("--date-col", dict(help="column holding the date when time of day is in --time-col")),
        ("--lat-col", dict(help="latitude column (decimal degrees, WGS84)")),
        ("--lon-col", dict(help="longitude column (decimal degrees, WGS84)")),
        ("--x-col", dict(help="easting column of projected input (with --y-col and --crs)")),
        ("--y-col", dict(help="northing column of projected input")),
        ("--crs", dict(help="EPSG:NNNN of projected input, or the planar frame to use for every animal")),
        ("--tz", dict(default="UTC", help="time zone of times without an offset, e.g. Europe/London "
                                          "(default UTC; times with an offset keep it)")),
        ("--time-format", dict(metavar="PATTERN", help="strftime pattern of the times (e.g. '%%d.%%m.%%Y %%H:%%M'), "
                                                       "or 'serial' for spreadsheet day numbers")),
        ("--deployment-col", dict(help="tag/collar column: each (animal, tag) is analysed as its own deployment")),
    ), frozenset(COMMANDS)),
    ("screening", (
        ("--max-dop", dict(type=float, help="reject fixes with DOP above this (needs a DOP column)")),
        ("--require-3d", dict(action="store_true", help="reject 2-D fixes (needs a fix-type column)")),
        ("--max-speed", dict(type=float, metavar="M_S", help="reject fixes implying a speed above this (m/s)")),
        ("--spike-speed", dict(type=float, metavar="M_S", help="speed in and out that marks an out-and-back "
                                                               "spike (default: from the animal's own speeds)")),
        ("--min-quality", dict(help="lowest accepted location-quality class (3, 2, 1, 0, A, B, Z)")),
        ("--keep", dict(action="append", default=[], metavar="REASON",
                        help="switch a screening rule off by its reason code (repeatable), e.g. --keep spike")),
    ), frozenset(COMMANDS)),
    ("schedule and segments", (
        ("--max-gap", dict(help="split tracks at gaps longer than this (e.g. 12h; default 5x the fix interval)")),
        ("--resample", dict(metavar="INTERVAL", help="interpolate onto a regular grid within segments (e.g. 1h)")),
    ), frozenset(COMMANDS)),
    ("models", (
        ("--min-step", dict(type=float, default=0.0, metavar="M",
                            help="leave steps of at most this length (m) out of step-length fits "
                                 "(state models: they form each state's zero mass)")),
        ("--bootstrap", dict(type=int, default=0, metavar="N",
                             help="parametric-bootstrap replicates for parameter intervals"), _FITTING),
        ("--seed", dict(type=int, default=Config.seed, help=f"run seed (default {Config.seed})")),
    ), _FITTING | _STATING),
    ("behavioural states", (
        ("--states", dict(default=",".join(map(str, Config.state_counts)), metavar="K",
                          help="numbers of states to compare by BIC, e.g. 2 or 1,2,3 "
                               f"(default {','.join(map(str, Config.state_counts))})")),
        ("--state-steps", dict(default=Config.state_step_family, metavar="FAMILY",
                               help=f"step-length family per state: gamma or weibull "
                                    f"(default {Config.state_step_family})")),
        ("--state-turns", dict(default=Config.state_turn_family, metavar="FAMILY",
                               help=f"turning-angle family per state: von_mises or wrapped_cauchy "
                                    f"(default {Config.state_turn_family})")),
        ("--state-starts", dict(type=int, default=Config.state_starts, metavar="N",
                                help=f"random starting points per model (default {Config.state_starts})")),
    ), _STATING),
    ("null tests", (
        ("--null", dict(default=",".join(DEFAULT_NULLS), help=_nulls_help())),
        ("--replicates", dict(type=int, default=Config.replicates, metavar="M",
                              help=f"simulated walks per animal and null (default {Config.replicates}, "
                                   f"at least {MIN_REPLICATES})")),
        ("--alpha", dict(type=float, default=Config.alpha,
                         help=f"significance level for verdicts, on q-values (default {Config.alpha})")),
    ), _TESTING),
    ("location error and smoothing (motion models)", (
        ("--uere", dict(type=float, metavar="M", help="user-equivalent range error (m): location error SD = DOP x M "
                                                      "(default: from location-quality classes, else estimated)")),
        ("--error-classes", dict(metavar="CSV", help="location-quality class -> error SD table "
                                                     "(header class,sd_m), overriding the built-in one")),
        ("--predict", dict(metavar="INTERVAL", help="also give smoothed positions on a regular grid "
                                                    "(e.g. 1h) in track_smoothed.csv")),
    ), _PER_ANIMAL),
    ("home ranges", (
        ("--kde-bandwidth", dict(type=float, metavar="M",
                                 help="kernel bandwidth in metres (default: reference bandwidth)")),
    ), _RANGING),
    ("sensitive species", (
        ("--mask-locations", dict(action="store_true",
                                  help="publish coordinates relative to a hidden origin (sensitive species)")),
        ("--mask-grid", dict(type=float, metavar="M",
                             help="with --mask-locations, also coarsen coordinates to this grid (m)")),
    ), _WRITING),
    ("output", (
        ("--out", dict(required=True, metavar="DIR", help="output folder")),
        ("--force", dict(action="store_true",
                         help="keep files of your own found in --out (each command replaces the folder's "
                              "earlier roamstat outputs as a whole)")),
        ("--format", dict(choices=("csv", "parquet"), default="csv", help="table format (default csv)")),
        ("--low-memory", dict(action="store_true", help="read in chunks and work a batch of animals at a time "
                                                        "(big deployments; same tables)")),
        ("--quiet", dict(action="store_true", help="no progress bar or closing summary")),
    ), _WRITING),
    ("execution", (
        ("--workers", dict(default="1", help="worker processes, or 'auto' for all cores (default 1)")),
        ("--scheduler", dict(metavar="tcp://HOST:PORT", help="run per-animal work on an existing Dask cluster")),
    ), _PER_ANIMAL),
    ("report", (
        ("--no-report", dict(action="store_true", help="skip figures and report.html")),
    ), frozenset({"run"})),
)


def _options_of(parser: argparse.ArgumentParser) -> list[str]:
    return [o for a in parser._actions for o in a.option_strings if o.startswith("--")]


def _unknown_option_error(parser: argparse.ArgumentParser, command: str, extras: list[str]) -> None:
    """Answer arguments a command does not take with that command's usage and the nearest option."""
    # the subparsers action maps each command name to its parser
    commands = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction)).choices
    cmd = commands[command]
    hints = []
    for word in (e.split("=")[0] for e in extras if e.startswith("-")):
        close = difflib.get_close_matches(word, _options_of(cmd), n=1, cutoff=0.6)
        elsewhere = [name for name, p in commands.items() if word in _options_of(p)]
        if elsewhere:
            hints.append(f"{word} is used only by {', '.join(elsewhere)}")
        elif close:
            hints.append(f"did you mean {close[0]}?")
    # A word that is not the value of an unknown option is a file given after the options.
    if any(not e.startswith("-") and (i == 0 or not extras[i - 1].startswith("-")) for i, e in enumerate(extras)):
        hints.append("give every FILE before the options")
    cmd.error(f"unrecognized arguments: {' '.join(extras)}" + (f" ({'; '.join(hints)})" if hints else ""))


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="roamstat",
        description="Screen GPS collar fixes, measure steps and turns, test net displacement against "
        "random-walk null models and seed home-range studies.",
        epilog="'roamstat COMMAND --help' lists the options of one command.",
    )
    parser.add_argument("--version", action="version", version=f"roamstat {__version__}")
    parser.add_argument("--debug", action="store_true", help="show the traceback of unexpected errors")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", required=True)
    for name, help_text in COMMANDS.items():
        cmd = sub.add_parser(name, help=help_text, description=help_text)
        cmd.add_argument("files", nargs="+", metavar="FILE",
                         help="CSV, GPX or Parquet files of collar fixes")
        for title, options, commands in _OPTIONS:
            if name in commands:
                group = cmd.add_argument_group(title)
                for flag, kwargs, *only in options:  # an option may name a narrower set of commands
                    if not only or name in only[0]:
                        group.add_argument(flag, **kwargs)
        cmd.add_argument("--debug", action="store_true", default=argparse.SUPPRESS, help=argparse.SUPPRESS)
    return parser


def command_list() -> str:
    """Every command with its one line, for ``roamstat`` without arguments."""
    width = max(map(len, COMMANDS))
    lines = [f"  {name:<{width}}  {text}" for name, text in COMMANDS.items()]
    return "\n".join(["usage: roamstat COMMAND FILE... [options]", "", "commands:", *lines, "",
                      "'roamstat COMMAND --help' lists the options of one command."])


#: Config field -> argparse destination, where the two differ.
_DEST = {"disabled_rules": "keep", "nulls": "null", "output_format": "format", "report": "no_report",
         "uere_m": "uere", "error_class_table": "error_classes",
         "state_counts": "states", "state_step_family": "state_steps", "state_turn_family": "state_turns"}


def config_from_args(args: argparse.Namespace) -> Config:
    """Build the frozen run configuration from parsed arguments (options a command lacks keep their defaults)."""
    from roamstat.parallel import resolve_workers

    values = {f.name: getattr(args, _DEST.get(f.name, f.name)) for f in dataclasses.fields(Config)
              if hasattr(args, _DEST.get(f.name, f.name))}
    if "disabled_rules" in values:
        values["disabled_rules"] = tuple(values["disabled_rules"])
    if "nulls" in values:
        values["nulls"] = tuple(n.strip() for n in values["nulls"].split(",") if n.strip())
    if "state_counts" in values:
        values["state_counts"] = _state_counts(values["state_counts"])
    if "report" in values:
        values["report"] = not values["report"]
    if "workers" in values:
        values["workers"] = resolve_workers(values["workers"])
    if values.get("mask_grid") is not None:
        values["mask_locations"] = True
    return check_config(Config(**values))


def _state_counts(text: str) -> tuple[int, ...]:
    """``--states 2`` or ``--states 1,2,3`` as a tuple of whole numbers (check_config checks the range)."""
    try:
        return tuple(int(k) for k in str(text).split(","))
    except ValueError:
        raise RoamstatError(f"--states {text!r}: give whole numbers of states separated by commas, "
                            "e.g. --states 2 or --states 1,2,3") from None


def main(argv: list[str] | None = None) -> int:
    argv = list(sys.argv[1:] if argv is None else argv)
    if not [a for a in argv if a != "--debug"]:
        print(command_list(), file=sys.stderr)
        return 2
    parser = build_parser()
    args, extras = parser.parse_known_args(argv)
    if extras:
        _unknown_option_error(parser, args.command, extras)
    if not args.debug:
        # Edge cases (a zero-variance fit, a divergent moment) are handled where they arise and
        # reported in the tables' notes; library warnings (numpy's floating-point chatter,
        # matplotlib's missing-font messages, which come through logging) would only alarm users.
        warnings.simplefilter("ignore")
        logging.getLogger().addHandler(logging.NullHandler())
        logging.getLogger("matplotlib").setLevel(logging.ERROR)
    previous = _on_sigterm(_stop)
    try:
        return _dispatch(args, argv)
    except RoamstatError as exc:
        print(f"roamstat: error: {shown(exc)}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        return _stopped(signal.SIGINT)
    except Stopped as exc:
        return _stopped(exc.signum)
    except Exception as exc:  # a bug, not bad input
        signum = _stop_signal(exc)
        if signum is not None:
            return _stopped(signum)
        if args.debug:
            raise
        print(f"roamstat: internal error: {type(exc).__name__}: {shown(exc)} "
              "(this is a bug; rerun with --debug for the traceback and report it)", file=sys.stderr)
        return 1
    finally:
        _on_sigterm(previous)


def _on_sigterm(handler):
    """Install a SIGTERM handler; returns the previous one (None off the main thread, where Python allows none)."""
    try:
        return signal.signal(signal.SIGTERM, handler) if handler is not None else None
    except ValueError:
        return None


def _stop_signal(exc: BaseException) -> int | None:
    """The signal behind an exception, if a stop caused it.

    A signal that lands inside compiled code (a numba kernel) comes back wrapped: the kernel
    returns with the KeyboardInterrupt or Stopped set, and Python raises SystemError with it as
    the cause. Such a stop is still a stop, not a bug.
    """
    seen: BaseException | None = exc
    while seen is not None:
        if isinstance(seen, KeyboardInterrupt):
            return signal.SIGINT
        if isinstance(seen, Stopped):
            return seen.signum
        seen = seen.__cause__ or seen.__context__
    return None


def _stop(signum, frame):
    raise Stopped(signum)


def _stopped(signum: int) -> int:
    """Say what a stop leaves behind (never that outputs are complete); exit 128 + signal number."""
    print(f"roamstat: stopped by {signal.Signals(signum).name}; no partial outputs were kept: the output folder "
          "holds one whole run, its earlier one unless this run had already finished", file=sys.stderr)
    return 128 + signum


def _dispatch(args: argparse.Namespace, argv: list[str]) -> int:
    cfg = config_from_args(args)
    if args.command == "inspect":
        from roamstat.inspect import inspect_text

        print(shown(inspect_text(args.files, cfg)))
        return 0
    from roamstat.io.times import unused_zone_note
    from roamstat.run import run_command

    result = run_command(args.command, args.files, args.out, cfg, argv)
    if note := unused_zone_note(cfg.tz, result.loaded.read.tz_note):
        print(f"roamstat: {shown(note)}", file=sys.stderr)
    if not cfg.quiet:
        print(shown(closing_summary(result)), file=sys.stderr)
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
