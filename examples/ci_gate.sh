#!/bin/sh
# Gate a data set in CI before any model is trained on it: accept one batch once, then gate every
# later batch on its own findings and on what changed since the accepted one.
#
# A plain POSIX shell step: any CI system that can run a command can run it. It audits the data,
# keeps machine-readable reports (JSON, JUnit XML for a test-results view, Markdown for a
# pull-request comment), prints the verdict table into the log, and exits with the gate's status:
#   0  the data are fit (for MODEL, or for some candidate) and have not drifted from the baseline
#   1  the gate failed: the table says which findings, the section "Compared with the baseline"
#      which drift, and the lines under the table the rules applied
#   2  usage or data error (one line on stderr naming the file, line or column)
#
#   sh examples/ci_gate.sh                          # the demo data (written first if missing)
#   sh examples/ci_gate.sh path/to/data.csv label   # your data and its class column
#
# The baseline flow:
#   1. The first run finds no baseline file: it audits the batch, writes its JSON report to
#      $BASELINE and gates on the findings alone. Review the report; if you accept the batch,
#      commit $BASELINE (it holds the findings, the recommendation and the exact per-class
#      counts, means and covariances; no rows).
#   2. Every later run compares the new batch with $BASELINE and fails when the recommendation
#      changed, a check that matters for MODEL got worse, a class appeared or vanished, or a
#      class's share, mean or covariance moved beyond sampling noise by more than a stated size.
#   3. To accept a new batch, run with ACCEPT=1 (it rewrites $BASELINE) and commit the file.
#
# Settings: MODEL=qda gates for the model you ship (lda, regularized_lda, qda,
# logistic_regression, unpenalized_logistic_regression; empty: any candidate); FAIL_ON=warn makes
# warnings of the findings that matter fail too; BASELINE=file chooses the accepted report
# (default ci/discaudit-baseline.json); REPORTS=dir where reports go; DISCAUDIT="python -m
# discaudit" runs the module instead of the console script. Thresholds, severities and `model`
# may also live in [tool.discaudit] of pyproject.toml; the log says which settings file applied.
set -u

DATA="${1:-examples/data/flakes.csv}"
TARGET="${2:-family}"
INDEX_COL="${INDEX_COL-flake_id}"          # the demo's row labels; set INDEX_COL= for none
FAIL_ON="${FAIL_ON:-fail}"
MODEL="${MODEL-}"
BASELINE="${BASELINE:-ci/discaudit-baseline.json}"
ACCEPT="${ACCEPT:-0}"
REPORTS="${REPORTS:-discaudit-reports}"
DISCAUDIT="${DISCAUDIT:-discaudit}"

if [ "$#" -eq 0 ] && [ ! -f "$DATA" ]; then
    "${PYTHON:-python3}" examples/make_flake_data.py --output "$DATA" || exit 2
fi
mkdir -p "$REPORTS" "$(dirname "$BASELINE")" || exit 2

set -- "$DATA" --target "$TARGET" --fail-on "$FAIL_ON"
if [ -n "$INDEX_COL" ]; then
    set -- "$@" --index-col "$INDEX_COL"
fi
if [ -n "$MODEL" ]; then
    set -- "$@" --model "$MODEL"
fi
if [ -f "$BASELINE" ] && [ "$ACCEPT" != "1" ]; then
    echo "discaudit: comparing $DATA with the accepted baseline $BASELINE"
    set -- "$@" --baseline "$BASELINE"
    WRITE=""
else
    echo "discaudit: no accepted baseline yet (or ACCEPT=1): this batch's report becomes $BASELINE"
    WRITE="$BASELINE"
fi

# Reports first, kept whatever the verdict (the CI system can archive the folder).
if [ -n "$WRITE" ]; then
    $DISCAUDIT check "$@" --format json --output "$REPORTS/discaudit.json" --write-baseline "$WRITE" >/dev/null
else
    $DISCAUDIT check "$@" --format json --output "$REPORTS/discaudit.json" >/dev/null
fi
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
    0) echo "discaudit: the data are fit and have not drifted; reports in $REPORTS/" ;;
    1) echo "discaudit: the gate failed (see the table, its rule and the baseline section above, or $REPORTS/discaudit.md)" >&2 ;;
    *) echo "discaudit could not audit $DATA (exit $status); see the error above" >&2 ;;
esac
if [ -n "$WRITE" ] && [ "$status" -le 1 ]; then
    echo "discaudit: review the report, then commit $BASELINE to accept this batch"
fi
exit "$status"
