"""Command line: ``discaudit check DATA --target COL`` gates a data set in CI.

Reads a CSV (``.csv``, ``.csv.gz``) or Parquet (``.parquet``, ``.pq``) file, runs
:func:`discaudit.preflight`, writes a report and exits

* 0 when the gate passes: the data are fit for ``--model`` (or, without it, usable and fit for
  some candidate; :mod:`discaudit.decision.gate`) and, with ``--baseline``, the batch has not
  drifted from the accepted report in a way that matters (:mod:`discaudit.decision.baseline`),
* 1 when it fails,
* 2 for a usage or data error, with one line on stderr naming the file, line, column or key at
  fault (never a traceback).

Settings come from ``[tool.discaudit]`` of the nearest pyproject.toml or from ``--config
FILE`` (see :mod:`discaudit.config_file`); command-line options win over the file, which
wins over the defaults; one line on stderr says which file applied (or "defaults").
Report formats are the entries of :data:`FORMATS`; to add one, register a renderer there
(its name becomes a ``--format`` choice).
"""

from __future__ import annotations

import argparse
import dataclasses
import os
import re
import sys
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import NoReturn, TextIO

from discaudit import config_file
from discaudit.audit import preflight
from discaudit.config import CATEGORICAL_POLICIES, GATE_MODELS, MISSING_POLICIES, NON_NUMERIC_POLICIES, Config
from discaudit.decision import baseline
from discaudit.decision.gate import FAIL_ON_LEVELS
from discaudit.errors import DataError
from discaudit.progress import Progress
from discaudit.verdict import Verdict

__all__ = ["FORMATS", "build_parser", "main", "read_table"]
from discaudit.sources.files import (
    check_csv_layout,
    csv_line,
    kind,
    kind_name,
    read_table,
    screen_labels,
)
from discaudit.stream import preflight_file, preflight_sql

#: A renderer turns a finished (gated) verdict into report text.
Renderer = Callable[[Verdict], str]


def _text(verdict: Verdict) -> str:
    return str(verdict) + "\n"  # what print(verdict) shows


def _json(verdict: Verdict) -> str:
    return verdict.to_json() + "\n"


def _markdown(verdict: Verdict) -> str:
    return verdict.to_markdown()


def _junit(verdict: Verdict) -> str:
    return verdict.to_junit()


def _html(verdict: Verdict) -> str:
    return verdict.to_html()


#: ``--format`` name -> renderer. Adding a format is one entry here.
FORMATS: dict[str, Renderer] = {"text": _text, "json": _json, "markdown": _markdown, "junit": _junit, "html": _html}

_CONFIG_ADVICE = re.compile(r"Config\((missing|non_numeric|categorical)='(\w+)'\)")

EPILOG = """\
examples:
  discaudit check flakes.csv --target family --index-col flake_id
  discaudit check flakes.csv --target family --model regularized_lda
  discaudit check accepted.csv --target family --write-baseline accepted.json
  discaudit check new_batch.csv --target family --baseline accepted.json
  discaudit check flakes.csv --target family --index-col flake_id --format markdown --output audit.md
  discaudit check data.parquet --target label --format json --output audit.json
  discaudit check data.csv.gz --target label --exclude batch,operator --fail-on warn
  discaudit check data.csv --target label --format junit --output discaudit.xml --config ci/discaudit.toml
  discaudit check flakes.csv --target family --index-col flake_id --what-if "drop=nir_1340,nir_1400;standardize"
  discaudit check big.parquet --target label --stream
  discaudit check --sql "SELECT * FROM 'data/*.parquet' WHERE year = 2024" --target label

exit status:
  0  the data are fit for --model (without it: usable, and fit for at least one candidate) and,
     with --baseline, the batch has not drifted from the accepted report in a way that matters
  1  the gate failed: the report says which findings or which drift, and the rule it applied
  2  usage or data error; one line on stderr names the file, line, column or key at fault

the gate:
  --model lda|regularized_lda|qda|logistic_regression|unpenalized_logistic_regression judges
  the findings that bear on that model (unequal covariances do not fail a QDA gate, a
  non-Gaussian shape does not fail a logistic gate, separation fails only the unpenalized
  logistic gate); a finding fails it when it reaches --fail-on (advisory checks never count).
  Without --model the gate fails only when the data are unusable or no candidate is fit.

settings:
  Thresholds and per-check severities come from [tool.discaudit] in the nearest
  pyproject.toml (searching from the current directory upward; a pyproject.toml without that
  table means the defaults), or from the TOML file given by --config. Command-line options
  override the file, which overrides the defaults. One line on stderr names the file used.
  Example:
    [tool.discaudit]
    fail_on = "fail"
    model = "qda"
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
        help="lowest status of a finding that bears on the gated model that fails the gate (default: fail_on from "
        "the config file, else fail)",
    )
    check.add_argument(
        "--model",
        choices=GATE_MODELS,
        default=None,
        help="the model to gate for: only findings that bear on it fail the gate (default: model from the config "
        "file, else any candidate)",
    )
    check.add_argument(
        "--baseline",
        metavar="FILE",
        help="JSON report of an accepted run: exit 1 when this batch drifted from it in a way that matters",
    )
    check.add_argument(
        "--write-baseline",
        metavar="FILE",
        help="also write this run's JSON report to FILE, to accept it as the baseline of later batches",
    )
    check.add_argument(
        "--min-class-rows",
        type=_seed,
        default=None,
        metavar="N",
        help="drop the rows of classes with fewer than N rows (named in a note) instead of stopping",
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
        "--categorical",
        choices=CATEGORICAL_POLICIES,
        default=None,
        help="categorical (Parquet dictionary) columns: as non-numeric, or their codes (overrides the file)",
    )
    check.add_argument(
        "--stream",
        action="store_true",
        help="read the file in batches with bounded memory (automatic for files larger than a quarter of RAM)",
    )
    check.add_argument("--batch-rows", type=int, default=200_000, metavar="N", help="rows per batch when streaming")
    check.add_argument(
        "--reader",
        choices=("auto", "duckdb", "arrow"),
        default="auto",
        help="how --stream reads the file: DuckDB (all cores), pyarrow's batch readers, or auto (DuckDB when "
        "installed); naming a reader implies --stream",
    )
    check.add_argument(
        "--what-if",
        metavar="SPEC",
        help="also audit the data changed as SPEC says and print both verdicts side by side (text, json or "
        "markdown; the exit status is the original audit's): 'drop=a,b;drop_rows=12,40;merge=x+y;standardize;"
        "transform=a,b'",
    )
    check.set_defaults(run=run_check)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; return the exit status (0 pass, 1 gate failed, 2 error, 130 interrupted).

    Ctrl-C at any point ends with one line on stderr and status 130: no traceback, and no report
    file half written (reports are written to a temporary name and renamed).
    """
    try:
        parser = build_parser()
        try:
            args = parser.parse_args(argv)
        except UsageError as exc:
            return _error(str(exc))
        except SystemExit as exc:  # --help and --version
            return exc.code if isinstance(exc.code, int) else 0
        return int(args.run(args))
    except KeyboardInterrupt:
        return _error("interrupted", status=130)


def run_check(args: argparse.Namespace) -> int:
    """The ``check`` subcommand: read, audit, compare with a baseline, report, gate."""
    if args.data is None and args.sql is None:
        return _error("give a data file, or a query with --sql (see 'discaudit check --help')")
    stage = "reading the settings"
    where = args.config or "settings"
    try:
        settings = config_file.load(args.config) if args.config else config_file.discover()
        config = config_file.make_config(
            settings,
            {
                "missing": args.missing,
                "non_numeric": args.non_numeric,
                "categorical": args.categorical,
                "model": args.model,
                "fail_on": args.fail_on,
            },
        )
        accepted = None
        if args.baseline:
            stage, where = "reading the baseline", args.baseline
            accepted = baseline.load_baseline(args.baseline)
        stage, where = "reading the data", args.data or "--sql query"
        if args.sql is not None:
            if args.min_class_rows is not None:
                raise DataError("--min-class-rows needs the whole file in memory; it cannot be used with --sql.")
            verdict = _sql_audit(args, config)
        elif args.stream or args.reader != "auto" or _larger_than_memory_share(Path(args.data)):
            if args.min_class_rows is not None:
                raise DataError("--min-class-rows needs the whole file in memory; it cannot be used with --stream.")
            verdict = _stream_audit(args, config)  # reads while it audits: parse errors count as reading
        else:
            verdict = _in_memory_audit(args, config)
        if accepted is not None:
            stage, where = "comparing with the baseline", args.baseline
            verdict = baseline.compare(verdict, accepted, config, source=str(args.baseline))
        stage, where = "writing the report", args.output or "<stdout>"
        if getattr(args, "what_if", None):
            stage, where = "auditing the what-if", "--what-if"
            report = _what_if_report(verdict, args.what_if, args.format)
            stage, where = "writing the report", args.output or "<stdout>"
        else:
            report = FORMATS[args.format](verdict)
        gate = verdict.gate
        assert gate is not None  # every audit gates
        if args.write_baseline:
            stage, where = "writing the baseline", args.write_baseline
            _write_file(Path(args.write_baseline), verdict.to_json() + "\n")
            stage, where = "writing the report", args.output or "<stdout>"
        if args.output:
            _write_file(Path(args.output), report)
            drift = f"; {verdict.baseline.headline}" if verdict.baseline is not None else ""
            _write(
                sys.stdout,
                f"discaudit: {gate.headline}{drift} (exit {0 if gate.passed else 1}); "
                f"{args.format} report written to {args.output}\n",
            )
        else:
            _write(sys.stdout, report)
        _write(sys.stderr, f"discaudit: settings: {settings.source}\n")
        if args.write_baseline:
            _write(sys.stderr, f"discaudit: baseline written to {args.write_baseline}\n")
        return 0 if gate.passed else 1
    except DataError as exc:
        prefix = "" if str(where) in str(exc) or stage == "reading the settings" else f"{where}: "
        return _error(prefix + _as_options(str(exc)) + _lines_of(exc, args, stage))
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
        if stage == "reading the baseline" and isinstance(exc, UnicodeDecodeError):
            return _error(f"{where}: not a JSON report (the file is not UTF-8 text).")
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
    frame, notes = screen_labels(frame, args.target, args.data, args.min_class_rows)
    for note in notes:
        _write(sys.stderr, f"discaudit: {note}\n")
    with Progress(f"auditing {len(frame)} rows of {Path(args.data).name}"):
        verdict = preflight(frame, target=args.target, config=config, random_state=args.seed)
    if notes:  # shown under the table in every format
        verdict = dataclasses.replace(verdict, meta={**verdict.meta, "notes": [*verdict.meta.get("notes", []), *notes]})
    return verdict


def _stream_audit(args: argparse.Namespace, config: Config) -> Verdict:
    """The file audited where it lies: through DuckDB, or pyarrow's batch readers (see :mod:`discaudit.stream`)."""
    path = Path(args.data)
    if not path.exists():
        raise FileNotFoundError(2, "No such file or directory", str(path))
    if args.batch_rows < 1:
        raise DataError("--batch-rows must be a positive number of rows.")
    if kind(path) == "csv":
        check_csv_layout(path)
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


def _what_if_report(verdict: Verdict, spec: str, fmt: str) -> str:
    """The audit and its what-if side by side (see :mod:`discaudit.report.what_if`)."""
    from discaudit.report.what_if import RENDERERS
    from discaudit.sources.what_if import Change

    if fmt not in RENDERERS:
        raise DataError(f"--what-if prints {', '.join(RENDERERS)}; got --format {fmt}.")
    change = Change.parse(spec)
    if change.is_empty():
        raise DataError(f"--what-if {spec!r} changes nothing; e.g. --what-if 'drop=a,b'.")
    after = verdict.what_if(**change.to_kwargs())
    return RENDERERS[fmt](verdict, after, change.to_spec())


def _write_file(path: Path, text: str) -> None:
    """Write ``text`` to ``path`` whole or not at all: to a temporary name beside it, then renamed."""
    temporary = path.with_name(f".{path.name}.{os.getpid()}.part")
    try:
        temporary.write_text(text, encoding="utf-8")
        os.replace(temporary, path)
    except BaseException:  # Ctrl-C or a full disk: leave no half-written file behind
        temporary.unlink(missing_ok=True)
        raise


def _lines_of(exc: DataError, args: argparse.Namespace, stage: str) -> str:
    """For an error about rows of a CSV file read without --index-col: the line the first is on."""
    if stage != "reading the data" or args.data is None or args.index_col is not None or not exc.rows:
        return ""
    first = exc.rows[0]
    if not isinstance(first, int):
        return ""
    try:
        line = csv_line(args.data, first)
    except (OSError, DataError, UnicodeError):
        return ""
    return "" if line is None else f" The first is on line {line} of {args.data}."


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
