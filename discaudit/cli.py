"""Command line: ``discaudit check DATA --target COL`` gates a data set in CI.

Reads a CSV (``.csv``, ``.csv.gz``) or Parquet (``.parquet``, ``.pq``) file, runs
:func:`discaudit.preflight`, writes a report and exits

* 0 when the gate passes (the verdict's status is below ``--fail-on``),
* 1 when it fails,
* 2 for a usage or data error, with one line on stderr naming the file, column or key at
  fault (never a traceback).

Settings come from ``[tool.discaudit]`` of the nearest pyproject.toml or from ``--config
FILE`` (see :mod:`discaudit.config_file`); command-line options win over the file, which
wins over the defaults. Report formats are the entries of :data:`FORMATS`; to add one,
register a renderer there (its name becomes a ``--format`` choice).
"""

from __future__ import annotations

import argparse
import os
import re
import sys
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import NoReturn, TextIO

from discaudit import config_file
from discaudit.audit import preflight
from discaudit.config import MISSING_POLICIES, NON_NUMERIC_POLICIES, Config
from discaudit.decision.gate import FAIL_ON_LEVELS, fails_gate
from discaudit.errors import DataError
from discaudit.progress import Progress
from discaudit.verdict import Verdict

__all__ = ["FORMATS", "build_parser", "main", "read_table"]
from discaudit.sources.files import kind_name, read_table
from discaudit.stream import preflight_file, preflight_sql

#: A renderer turns a verdict into report text; it gets the gate level for formats that use it.
Renderer = Callable[[Verdict, str], str]


def _text(verdict: Verdict, fail_on: str) -> str:
    return str(verdict) + "\n"  # what print(verdict) shows


def _json(verdict: Verdict, fail_on: str) -> str:
    return verdict.to_json() + "\n"


def _markdown(verdict: Verdict, fail_on: str) -> str:
    return verdict.to_markdown()


def _junit(verdict: Verdict, fail_on: str) -> str:
    return verdict.to_junit(fail_on=fail_on)


def _html(verdict: Verdict, fail_on: str) -> str:
    return verdict.to_html()


#: ``--format`` name -> renderer. Adding a format is one entry here.
FORMATS: dict[str, Renderer] = {"text": _text, "json": _json, "markdown": _markdown, "junit": _junit, "html": _html}

_CONFIG_ADVICE = re.compile(r"Config\((missing|non_numeric)='(\w+)'\)")

EPILOG = """\
examples:
  discaudit check flakes.csv --target family --index-col flake_id
  discaudit check flakes.csv --target family --index-col flake_id --format markdown --output audit.md
  discaudit check data.parquet --target label --format json --output audit.json
  discaudit check data.csv.gz --target label --exclude batch,operator --fail-on warn
  discaudit check data.csv --target label --format junit --output discaudit.xml --config ci/discaudit.toml
  discaudit check big.parquet --target label --stream
  discaudit check --sql "SELECT * FROM 'data/*.parquet' WHERE year = 2024" --target label

exit status:
  0  the gate passed: the verdict's status is below --fail-on (advisory checks never count)
  1  the gate failed
  2  usage or data error; one line on stderr names the file, column or key at fault

settings:
  Thresholds and per-check severities come from [tool.discaudit] in the nearest
  pyproject.toml (searching from the current directory upward), or from the TOML file given
  by --config. Command-line options override the file, which overrides the defaults.
  Example:
    [tool.discaudit]
    fail_on = "fail"
    vif_fail = 20
    [tool.discaudit.severity]
    normality = "advisory"
"""


class UsageError(Exception):
    """A command-line usage error (exit status 2)."""


class _Parser(argparse.ArgumentParser):
    """An argument parser whose errors are one line and do not exit by themselves."""

    def error(self, message: str) -> NoReturn:
        raise UsageError(f"{message} (see '{self.prog} --help')")


def build_parser() -> argparse.ArgumentParser:
    """The ``discaudit`` argument parser (``check`` subcommand)."""
    from discaudit._version import __version__

    parser = _Parser(
        prog="discaudit",
        description="Pre-flight audit of a labelled data set before fitting a discriminant classifier.",
        epilog=EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("--version", action="version", version=f"discaudit {__version__}")
    commands = parser.add_subparsers(dest="command", metavar="COMMAND", required=True)
    check = commands.add_parser(
        "check",
        help="audit a CSV or Parquet file and gate on the verdict",
        description="Audit a CSV or Parquet file, write a report, and exit 0 (gate passed), 1 (gate failed) "
        "or 2 (usage or data error).",
        epilog=EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    check.add_argument("data", metavar="DATA", nargs="?", help="data file: .csv, .csv.gz, .parquet or .pq")
    check.add_argument(
        "--sql",
        metavar="QUERY",
        help="audit the result of a DuckDB query instead of a file, e.g. \"SELECT * FROM 'data/*.parquet'\"",
    )
    check.add_argument("--target", required=True, metavar="COL", help="the class column")
    check.add_argument("--features", metavar="A,B,...", help="audit only these columns (comma-separated)")
    check.add_argument("--exclude", metavar="A,B,...", help="leave these columns out (comma-separated)")
    check.add_argument("--index-col", metavar="COL", help="column of row labels used in reports (not a feature)")
    check.add_argument("--format", choices=list(FORMATS), default="text", help="report format (default: text)")
    check.add_argument("--output", metavar="FILE", help="write the report to FILE instead of stdout")
    check.add_argument(
        "--fail-on",
        choices=FAIL_ON_LEVELS,
        default=None,
        help="lowest status that fails the gate (default: fail_on from the config file, else fail)",
    )
    check.add_argument("--seed", type=_seed, default=0, help="seed of every random step (default: 0)")
    check.add_argument("--config", metavar="FILE", help="TOML settings file (default: nearest pyproject.toml)")
    check.add_argument("--missing", choices=MISSING_POLICIES, default=None, help="NaN/inf policy (overrides the file)")
    check.add_argument(
        "--non-numeric",
        choices=NON_NUMERIC_POLICIES,
        default=None,
        help="non-numeric column policy (overrides the file)",
    )
    check.add_argument(
        "--stream",
        action="store_true",
        help="audit the file where it lies, through DuckDB or pyarrow, with bounded memory (automatic for files "
        "larger than a quarter of RAM)",
    )
    check.add_argument("--batch-rows", type=int, default=200_000, metavar="N", help="rows per batch when streaming")
    check.add_argument(
        "--reader",
        choices=("auto", "duckdb", "arrow"),
        default="auto",
        help="how --stream reads the file: DuckDB (all cores), pyarrow's batch readers, or auto (DuckDB when "
        "installed); naming a reader implies --stream",
    )
    check.set_defaults(run=run_check)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; return the exit status (0 pass, 1 gate failed, 2 error)."""
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except UsageError as exc:
        return _error(str(exc))
    except SystemExit as exc:  # --help and --version
        return exc.code if isinstance(exc.code, int) else 0
    try:
        return int(args.run(args))
    except KeyboardInterrupt:
        return _error("interrupted", status=130)


def run_check(args: argparse.Namespace) -> int:
    """The ``check`` subcommand: read, audit, report, gate."""
    if args.data is None and args.sql is None:
        return _error("give a data file, or a query with --sql (see 'discaudit check --help')")
    stage = "reading the settings"
    where = args.config or "settings"
    try:
        settings = config_file.load(args.config) if args.config else config_file.discover()
        config = config_file.make_config(settings, {"missing": args.missing, "non_numeric": args.non_numeric})
        fail_on = args.fail_on or settings.fail_on or "fail"
        stage, where = "reading the data", args.data or "--sql query"
        if args.sql is not None:
            verdict = _sql_audit(args, config)
        elif args.stream or args.reader != "auto" or _larger_than_memory_share(Path(args.data)):
            verdict = _stream_audit(args, config)  # reads while it audits: parse errors count as reading
        else:
            verdict = _in_memory_audit(args, config)
        stage, where = "writing the report", args.output or "<stdout>"
        report = FORMATS[args.format](verdict, fail_on)
        failed = fails_gate(verdict.status, fail_on)
        if args.output:
            Path(args.output).write_text(report, encoding="utf-8")
            outcome = "failed" if failed else "passed"
            _write(
                sys.stdout,
                f"discaudit: gate {outcome} (status {verdict.status}, fail-on {fail_on}); "
                f"{args.format} report written to {args.output}\n",
            )
        else:
            _write(sys.stdout, report)
        return 1 if failed else 0
    except DataError as exc:
        prefix = "" if str(exc).startswith(str(where)) or stage == "reading the settings" else f"{where}: "
        return _error(prefix + _as_options(str(exc)))
    except FileNotFoundError as exc:
        return _error(f"{exc.filename or where}: no such file.")
    except IsADirectoryError as exc:
        return _error(f"{exc.filename or where}: is a directory, not a file.")
    except PermissionError as exc:
        return _error(f"{exc.filename or where}: permission denied.")
    except OSError as exc:
        return _error(f"{getattr(exc, 'filename', None) or where}: {exc.strerror or exc} while {stage}.")
    except Exception as exc:
        if stage == "reading the data":  # pandas and pyarrow parse errors
            what = kind_name(args.data) if args.data else "a query result"
            return _error(f"{where}: cannot be read as {what}: {_first_line(exc)}")
        return _error(
            f"internal error while {stage} ({type(exc).__name__}: {_first_line(exc)}); please report it with "
            "the command that caused it."
        )


def _in_memory_audit(args: argparse.Namespace, config: Config) -> Verdict:
    frame = read_table(
        args.data,
        target=args.target,
        features=_names(args.features),
        exclude=_names(args.exclude) or (),
        index_col=args.index_col,
    )
    with Progress(f"auditing {len(frame)} rows of {Path(args.data).name}"):
        return preflight(frame, target=args.target, config=config, random_state=args.seed)


def _stream_audit(args: argparse.Namespace, config: Config) -> Verdict:
    """The file audited where it lies: through DuckDB, or pyarrow's batch readers (see :mod:`discaudit.stream`)."""
    path = Path(args.data)
    if args.batch_rows < 1:
        raise DataError("--batch-rows must be a positive number of rows.")
    with Progress(f"streaming {path.name}"):
        return preflight_file(
            path,
            args.target,
            features=_names(args.features),
            exclude=_names(args.exclude) or (),
            index_col=args.index_col,
            reader=args.reader,
            batch_rows=args.batch_rows,
            config=config,
            random_state=args.seed,
        )


def _sql_audit(args: argparse.Namespace, config: Config) -> Verdict:
    """``--sql QUERY``: the query's result audited inside DuckDB."""
    if args.data is not None:
        raise DataError("give either a data file or --sql, not both")
    if args.features or args.exclude:
        raise DataError("--features and --exclude do not apply to --sql; choose the columns in the query")
    with Progress("auditing the --sql query"):
        return preflight_sql(args.sql, args.target, index_col=args.index_col, config=config, random_state=args.seed)


def _larger_than_memory_share(path: Path, share: float = 0.25) -> bool:
    """Whether the file is larger than ``share`` of physical memory (then stream it)."""
    try:
        total = os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES")
        return path.exists() and path.stat().st_size > share * total
    except (ValueError, OSError, AttributeError):
        return False


def _as_options(message: str) -> str:
    """Library advice such as ``Config(missing='drop_rows')`` as the matching option ``--missing drop_rows``."""
    return _CONFIG_ADVICE.sub(lambda m: f"--{m.group(1).replace('_', '-')} {m.group(2)}", message)


def _seed(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"must be a whole number >= 0; got {text!r}") from None
    if value < 0:
        raise argparse.ArgumentTypeError(f"must be a whole number >= 0; got {text!r}")
    return value


def _names(option: str | None) -> list[str] | None:
    if option is None:
        return None
    return [n.strip() for n in option.split(",") if n.strip()]


def _first_line(exc: BaseException) -> str:
    text = " ".join(str(exc).split())
    return text if len(text) <= 300 else text[:297] + "..."


def _error(message: str, status: int = 2) -> int:
    _write(sys.stderr, f"discaudit: error: {' '.join(message.split())}\n")
    return status


def _write(stream: TextIO, text: str) -> None:
    try:
        stream.write(text)
        stream.flush()
    except BrokenPipeError:  # the reader went away (e.g. `| head`); nothing more to say
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, stream.fileno())


if __name__ == "__main__":  # pragma: no cover
    raise SystemExit(main())
