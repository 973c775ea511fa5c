# check lists the lines of the outlier samples (issue 16 item 2): a gross error planted in xB
# (+0.1 mol/mol, tens of times the analyser's stated uncertainty) on a known line of an
# invented demo log must be named in the text and in --json.
BIN=$1
ROOT=$2
. "$(dirname "$0")/lib.sh"
LOG="$ROOT/datasets/demo/logs/2025-02.csv"
# line 40 of the file (a production sample of the first run); xB is field 5
awk -F, -v OFS=, 'NR == 40 { $5 = sprintf("%.5f", $5 + 0.1) } { print }' "$LOG" >"$tmp/gross.csv"
"$BIN" check --quiet "$tmp/gross.csv" >"$tmp/out.txt"
if grep -q "outlier samples (line.* 40[, )]" "$tmp/out.txt"; then
    echo "ok: check names line 40"
else
    echo "FAIL: check does not name line 40"; cat "$tmp/out.txt"; fails=$((fails + 1))
fi
"$BIN" check --quiet --json "$tmp/gross.csv" >"$tmp/out.json"
if /usr/bin/python3 -c 'import json,sys
d=json.load(open(sys.argv[1]))
sys.exit(0 if any(40 in r["outlier_lines"] for r in d["runs"]) else 1)' "$tmp/out.json"; then
    echo "ok: --json lists line 40 in outlier_lines"
else
    echo "FAIL: --json outlier_lines lacks 40"; fails=$((fails + 1))
fi
finish
