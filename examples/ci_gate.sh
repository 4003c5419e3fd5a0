#!/bin/sh
# Gate a data set in CI before any model is trained on it.
#
# A plain POSIX shell step: any CI system that can run a command can run it. It audits the
# data, keeps machine-readable reports (JSON, JUnit XML for a test-results view, Markdown for a
# pull-request comment), prints the verdict table into the log, and exits with the gate's status:
#   0  the gate passed       1  the gate failed       2  usage or data error (one line on stderr)
#
#   sh examples/ci_gate.sh                          # the demo data (written first if missing)
#   sh examples/ci_gate.sh path/to/data.csv label   # your data and its class column
#
# Settings: FAIL_ON=warn makes warnings fail too; REPORTS=dir chooses where reports go;
# DISCAUDIT="python -m discaudit" runs the module instead of the console script. Thresholds
# and per-check severities are read from [tool.discaudit] in the nearest pyproject.toml.
set -u

DATA="${1:-examples/data/flakes.csv}"
TARGET="${2:-family}"
INDEX_COL="${INDEX_COL-flake_id}"          # the demo's row labels; set INDEX_COL= for none
FAIL_ON="${FAIL_ON:-fail}"
REPORTS="${REPORTS:-discaudit-reports}"
DISCAUDIT="${DISCAUDIT:-discaudit}"

if [ "$#" -eq 0 ] && [ ! -f "$DATA" ]; then
    "${PYTHON:-python3}" examples/make_flake_data.py --output "$DATA" || exit 2
fi
mkdir -p "$REPORTS" || exit 2

set -- "$DATA" --target "$TARGET" --fail-on "$FAIL_ON"
if [ -n "$INDEX_COL" ]; then
    set -- "$@" --index-col "$INDEX_COL"
fi

# Reports first, kept whatever the verdict (the CI system can archive the folder).
$DISCAUDIT check "$@" --format json --output "$REPORTS/discaudit.json" >/dev/null
if [ "$?" -ge 2 ]; then
    echo "discaudit could not audit $DATA; see the error above" >&2
    exit 2
fi
$DISCAUDIT check "$@" --format junit --output "$REPORTS/discaudit.xml" >/dev/null
$DISCAUDIT check "$@" --format markdown --output "$REPORTS/discaudit.md" >/dev/null

# The gate: the verdict table goes to the log, the exit status decides the step.
$DISCAUDIT check "$@"
status=$?
case "$status" in
    0) echo "discaudit gate passed; reports in $REPORTS/" ;;
    1) echo "discaudit gate failed (fail-on $FAIL_ON): see the table above, or $REPORTS/discaudit.md" >&2 ;;
    *) echo "discaudit could not audit $DATA (exit $status); see the error above" >&2 ;;
esac
exit "$status"
