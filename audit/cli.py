"""The ``sewer-audit`` command line.

Exit codes, for scripts and data pipelines:

* 0: the command finished;
* 1: the input could not be used (the message names the file, layer, key, field or feature);
* 2: the command line itself was wrong (argparse's own convention);
* 3: ``--fail-on SEVERITY`` was given and flags of that severity or worse were found;
* 130: interrupted (Ctrl-C); one line is printed, no traceback, and no output is left half
  written (128 + SIGINT, the status a shell reports);
* 141: standard output was closed before the command finished writing (the output piped into
  ``head``, say). The command stops quietly, with no traceback; 141 is 128 + SIGPIPE (13), the
  status a shell reports for a program stopped by a closed pipe.
"""

from __future__ import annotations

import argparse
import errno
import os
import signal
import sys
import warnings
from collections.abc import Sequence
from datetime import UTC, datetime
from pathlib import Path

# Only light modules here: the heavy ones (numpy, geopandas) load inside main, so that Ctrl-C
# during their import is caught like any other interrupt.
from audit.about import CAUTION, __version__
from audit.errors import AuditError, InputError, OutputExistsError

EXIT_OK = 0
EXIT_BAD_INPUT = 1
EXIT_USAGE = 2
EXIT_FLAGGED = 3
EXIT_INTERRUPTED = 128 + int(signal.SIGINT)  # 130: a shell's status for a program stopped by Ctrl-C
EXIT_CLOSED_PIPE = 128 + int(getattr(signal, "SIGPIPE", 13))  # 141: a shell's status for a program stopped by a closed pipe (POSIX)


OUTPUTS_HELP = """\
Writes into OUTDIR:
  audit.gpkg       layers pipes and manholes (every input feature and field, plus results and
                   flags) and findings (a point at each data problem)
  summary.json     counts and lengths per flag, network totals, data findings, rules used
  candidates.csv   pipes ranked for renewal, with their reasons
  report.html      one self-contained page for readers without a GIS: map, charts, tables
Field names and units: docs/outputs.md."""

DEMO_CONFIG = Path(__file__).resolve().parent / "sample_gis" / "town.toml"  # a link to sample_gis/ in a checkout; files in a wheel

DESCRIPTION = f"""\
Screen a gravity sewer network held as GIS layers (pipes as lines, manholes as points).

Typical session:
  sewer-audit inspect town.gpkg            list layers and fields; write a starter config
  (edit town.toml: map your field names and units)
  sewer-audit run town.toml -o audit_out   audit the network; write flagged layers and a summary
  sewer-audit demo -o demo_out             the same on the bundled invented town
  sewer-audit compare audit_2024 audit_out -o changes
                                           what appeared, cleared or changed since an earlier audit

{CAUTION}
"""

COMPARE_HELP = """\
Compare two audits of a register (made by `sewer-audit run` or `demo`): which pipes and manholes
were added, removed or changed, which register fields changed, which flags were gained or
cleared, whether severities went up or down, and how the totals moved.

Features are matched by their id where it is unique in both audits (the id field the audit's
config mapped, or --pipe-id / --manhole-id); duplicate, missing or placeholder ids fall back to
geometry: a pipe whose two ends lie within --tolerance of the other's ends, in either order.
Whatever cannot be matched is listed as added or removed. Numbers are compared in OLD's unit
system. Audits made with other rule settings or tool versions are compared too, but every
output says so first: a changed rule, not a changed network, may explain a difference.

Writes into OUTDIR:
  compare.gpkg     layers pipes and manholes: each feature with its change columns (the new
                   geometry, or the old one for a removed feature)
  changes.csv      one row per pipe or manhole that is not unchanged
  compare.json     totals before and after per flag and severity, counts of each change, the
                   two audits' versions, times, units and rules, and the settings that differ
  compare.html     one self-contained page with a map of what got worse and what got better
Columns and rules: docs/compare.md.

Example:
  sewer-audit compare audit_2024 audit_2025 -o changes --fail-on-new high"""


def _build_parser() -> argparse.ArgumentParser:
    from audit.rules import SEVERITY_ORDER

    parser = argparse.ArgumentParser(
        prog="sewer-audit",
        description=DESCRIPTION,
        formatter_class=argparse.RawDescriptionHelpFormatter,
        epilog="Exit codes: 0 finished, 1 unusable input, 2 usage error, 3 --fail-on (or compare's --fail-on-new) threshold reached, "
        "130 interrupted (Ctrl-C), 141 output closed early (piped into head).",
    )
    parser.add_argument("--version", action="version", version=f"%(prog)s {__version__}")
    commands = parser.add_subparsers(dest="command", metavar="COMMAND", required=True)

    inspect = commands.add_parser(
        "inspect",
        help="list the layers, fields, CRS and feature counts of a file; write a starter config",
        description="List the layers of a vector file (GeoPackage, Shapefile, GeoJSON, FlatGeobuf) "
        "with their fields, types, CRS and feature counts, and write a starter TOML config with "
        "guessed field mappings for you to check and edit.",
    )
    inspect.add_argument("path", help="the vector file (or a folder of Shapefiles) holding pipes and manholes")
    inspect.add_argument(
        "--config-out",
        metavar="TOML",
        help="where to write the starter config (default: <file stem>.audit.toml beside the file; "
        "an existing file is never overwritten)",
    )
    for name, summary in (
        ("run", "audit the network described by a TOML config and write the results to a folder"),
        ("demo", "run the audit on the bundled invented town (sample_gis/town.toml)"),
    ):
        stage = commands.add_parser(name, help=summary, description=f"{summary}.\n\n{OUTPUTS_HELP}", formatter_class=argparse.RawDescriptionHelpFormatter)
        if name == "run":
            stage.add_argument("config", help="the TOML config (see docs/config.md; `sewer-audit inspect` writes a starter)")
        stage.add_argument("-o", "--output", required=True, metavar="OUTDIR", help="folder for the results (created if missing)")
        stage.add_argument("--overwrite", action="store_true", help="replace our output files in an existing folder (other files are left alone)")
        stage.add_argument(
            "--fail-on",
            choices=SEVERITY_ORDER,
            metavar="SEVERITY",
            help=f"exit with code 3 when any pipe has a flag of this severity or worse ({', '.join(SEVERITY_ORDER)})",
        )
        stage.add_argument("-q", "--quiet", action="store_true", help="no progress bars and no summary table")
    compare = commands.add_parser(
        "compare",
        help="compare two audits: what was added, removed or changed, which flags appeared or cleared",
        description=COMPARE_HELP,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    compare.add_argument("old", metavar="OLD", help="the earlier audit: the folder `sewer-audit run -o` wrote, or its audit.gpkg")
    compare.add_argument("new", metavar="NEW", help="the later audit, the same way")
    compare.add_argument("-o", "--output", required=True, metavar="OUTDIR", help="folder for the comparison (created if missing)")
    compare.add_argument(
        "--tolerance",
        type=_distance,
        metavar="DISTANCE",
        help="how far apart the ends of one pipe (or one manhole) may lie in the two audits to be matched by geometry, "
        "in OLD's length unit (m or ft; default 0.5 m)",
    )
    compare.add_argument("--pipe-id", metavar="FIELD", help="the pipes' id field in both audits (default: as each audit's config mapped it)")
    compare.add_argument("--manhole-id", metavar="FIELD", help="the manholes' id field in both audits (default: as each audit's config mapped it)")
    compare.add_argument(
        "--fail-on-new",
        choices=SEVERITY_ORDER,
        metavar="SEVERITY",
        help=f"exit with code 3 when any pipe gained a flag of this severity or worse ({', '.join(SEVERITY_ORDER)}); "
        "an added pipe gains all its flags",
    )
    compare.add_argument("--overwrite", action="store_true", help="replace our output files in an existing folder (other files are left alone)")
    compare.add_argument("-q", "--quiet", action="store_true", help="no summary table")
    return parser


def _distance(text: str) -> float:
    """A command-line distance: a finite number >= 0."""
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a distance (a number >= 0), got {text!r}") from None
    if not 0.0 <= value < float("inf"):
        raise argparse.ArgumentTypeError(f"expected a distance (a number >= 0), got {text!r}")
    return value


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; return the exit code (see the module docstring).

    A reader that closes standard output early (``sewer-audit inspect town.gpkg | head -1``)
    ends the command quietly with ``EXIT_CLOSED_PIPE``: what was still to be written is sent to
    the null device, so Python's last flush at exit finds no broken pipe either.

    Library warnings (numpy's on arithmetic with the NaN that stands for a missing value, GDAL's
    notices) are not shown: a problem in the data reaches the user as a finding, an unusable
    input as a message. The Python API keeps them. A full disk is said as such, wherever it
    stops the command.
    """
    try:
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                code = _main(argv)
        except SystemExit:  # --help, --version and usage errors print, then exit: flush while we can still catch
            sys.stdout.flush()
            raise
        sys.stdout.flush()
    except BrokenPipeError:
        _silence_stdout()
        return EXIT_CLOSED_PIPE
    except KeyboardInterrupt:
        print("sewer-audit: interrupted; no output was written", file=sys.stderr)
        return EXIT_INTERRUPTED
    except OSError as error:
        if error.errno not in (errno.ENOSPC, errno.EDQUOT):
            raise
        print(f"sewer-audit: the disk is full ({error.filename or 'writing'}); free some space and run again", file=sys.stderr)
        return EXIT_BAD_INPUT
    return code


MESSAGE_LIMIT = 3000
"""Most characters of a message printed [-]: a library's error can carry a whole SQL statement."""


def _bounded(message: str) -> str:
    """The message cut to :data:`MESSAGE_LIMIT` characters in its middle, so its start (the file) and its end (why) stay.

    >>> cut = _bounded("a" + "x" * 3010 + "z")
    >>> cut[0], cut[1500:1534], cut[-1]
    ('a', ' ... (12 characters left out) ... ', 'z')
    """
    if len(message) <= MESSAGE_LIMIT:
        return message
    half = MESSAGE_LIMIT // 2
    return f"{message[:half]} ... ({len(message) - 2 * half:,} characters left out) ... {message[-half:]}"


def _silence_stdout() -> None:
    """Point standard output at the null device, so nothing more is written to the closed pipe."""
    try:
        descriptor = sys.stdout.fileno()
    except (AttributeError, OSError, ValueError):
        return  # not a real file (a test's capture): nothing will be flushed to a pipe
    null = os.open(os.devnull, os.O_WRONLY)
    os.dup2(null, descriptor)
    os.close(null)


def _main(argv: Sequence[str] | None) -> int:
    """Parse the command line and run the command."""
    parser = _build_parser()
    args = parser.parse_args(argv)
    try:
        if args.command == "inspect":
            from audit.inspect import inspect_command

            return inspect_command(args)
        if args.command == "compare":
            return _compare_command(args)
        return _audit_command(args)
    except OutputExistsError as error:
        print(f"sewer-audit: {_bounded(str(error))}", file=sys.stderr)
        return EXIT_USAGE
    except AuditError as error:
        print(f"sewer-audit: {_bounded(str(error))}", file=sys.stderr)
        return EXIT_BAD_INPUT
    parser.error(f"unknown command {args.command!r}")
    return EXIT_USAGE  # pragma: no cover - parser.error exits


def _audit_command(args: argparse.Namespace) -> int:
    """``run`` and ``demo``: audit, write the outputs, print the table, pick the exit code."""
    from audit.outputs import print_summary_table, write_outputs
    from audit.pipeline import run
    from audit.report import REPORT_NAME, write_report
    from audit.rules import worst_severity_at_least

    config = Path(args.config) if args.command == "run" else DEMO_CONFIG
    if args.command == "demo" and not config.exists():
        raise InputError(f"{config}: the bundled sample is missing; reinstall sewer-audit, or run `python scripts/make_sample_gis.py` in a source checkout")
    show = not args.quiet and sys.stderr.isatty()
    result = run(config, progress=show)
    created = datetime.now(UTC)  # one time stamp for every output of the run
    paths = write_outputs(result, Path(args.output), overwrite=args.overwrite, progress=show, created=created,
                          extra={"report": (REPORT_NAME, lambda folder: write_report(result, folder, created=created))})  # fmt: skip
    if not args.quiet:
        print_summary_table(result, paths, file=sys.stdout)
    if args.fail_on and worst_severity_at_least(result.pipe_results["severity"].to_numpy(dtype=object), args.fail_on).any():
        return EXIT_FLAGGED
    return EXIT_OK


def _compare_command(args: argparse.Namespace) -> int:
    """``compare``: read both audits, compare, write the outputs, print the table, pick the exit code."""
    from audit.compare import compare_audits, print_comparison, read_audit, write_comparison
    from audit.rules import worst_severity_at_least

    audits = [read_audit(Path(path), label=label, pipe_id=args.pipe_id, manhole_id=args.manhole_id)
              for path, label in ((args.old, "OLD"), (args.new, "NEW"))]  # fmt: skip
    comparison = compare_audits(*audits, tolerance=args.tolerance)
    del audits  # the comparison keeps what it needs; the audits' features need not stay in memory while the files are written
    paths = write_comparison(comparison, Path(args.output), overwrite=args.overwrite, created=datetime.now(UTC))
    if not args.quiet:
        print_comparison(comparison, paths, file=sys.stdout)
    gained = comparison.pipes.table["gained_severity"].to_numpy(dtype=object)
    if args.fail_on_new and worst_severity_at_least(gained, args.fail_on_new).any():
        return EXIT_FLAGGED
    return EXIT_OK


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
