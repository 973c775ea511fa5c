#!/bin/sh
# test_cli_contract.sh — the command-line contract across commands (docs/cli.md, "Exit
# codes"): a library "invalid argument" that is really about a file's content is bad data
# (65), not a usage error (2); strict number parsing; one-line errors from the top level;
# --json owns stdout; options before or after the arguments of `plot`; the warning about
# Antoine sets used outside their stated range (once per command, with the bubble curve's
# temperatures).
#   sh test_cli_contract.sh <stagecal-binary> <repo-root>
# JSON and the closed-form boiling points are computed with /usr/bin/python3.
BIN=$1
ROOT=$2
py=/usr/bin/python3
# Scratch files (lib.sh's mktemp) stay inside the build tree, next to the binary.
TMPDIR=$(cd "$(dirname "$BIN")" && pwd)
export TMPDIR
. "$(dirname "$0")/lib.sh"

BT=$ROOT/datasets/columns/demo_benzene_toluene.json
ALPHA=$ROOT/datasets/columns/demo_alpha.json
LOGS=$ROOT/datasets/demo/logs
MISRA=$ROOT/datasets/reference/misra1a.csv

# --- file content is bad data (65), not usage (2) -------------------------------------
# A form that needs F on points without an F column (the known defect: was exit 2).
expect_exit 65 "needs the vapour load F" -- "$BIN" regress "$MISRA" --form saturating-load
# A linear form undefined at a point: 1/F at F = 0.
printf 'R,stages,F\n0.5,2,0\n1,3,1\n2,4,1\n3,4.5,2\n' >"$tmp/f0.csv"
expect_exit 65 "undefined at R = 0.5" -- "$BIN" regress "$tmp/f0.csv" --form 'linear:1+1/F'
# The same with --json: nothing on stdout.
expect_exit 65 "undefined at R = 0.5" -- "$BIN" regress "$tmp/f0.csv" --form 'linear:1+1/F' --json

# --- strict numbers (cli_parse_double / cli_parse_long) -------------------------------
for v in ' 3' '0x3' 'nan' '3 ' '1e999' '-inf'; do
    expect_exit 2 "option '--reflux': '$v' is not a number" -- \
        "$BIN" steps --alpha 2.5 --xd 0.95 --reflux "$v" --stages 3
done
expect_exit 2 "option '--bootstrap': ' 5' is not an integer" -- \
    "$BIN" regress "$MISRA" --form constant --bootstrap ' 5'
expect_exit 0 "" -- "$BIN" steps --alpha 2.5 --xd 0.95 --reflux inf --stages 3
# A huge stage count is refused before the profile is sized (fuzz find steps-stages-1e300).
expect_exit 2 "option '--stages': 1e+300 is above 10000" -- \
    "$BIN" steps --alpha 2.5 --xd 0.95 --reflux 3 --stages 1e300

# --- top level: one line, naming the problem ------------------------------------------
expect_exit 2 "stagecal: unknown option '--bogus'" -- "$BIN" --bogus
expect_exit 2 "stagecal: unknown option '-x'" -- "$BIN" -x
expect_exit 2 "'frob' is not a command (expected one of: check steps calibrate" -- "$BIN" frob

# --- --json owns stdout -----------------------------------------------------------------
expect_exit 2 "options '--json' and '--output -'" -- \
    "$BIN" invert --column "$ALPHA" --json --output - "$LOGS/2025-01.csv"
expect_exit 0 "" -- "$BIN" invert --column "$ALPHA" --json --output "$tmp/rows.csv" "$LOGS/2025-01.csv"
$py -c 'import json,sys; d=json.load(open(sys.argv[1])); assert d["format"] == "stagecal-invert-runlog"' \
    "$tmp/out" || { echo "FAIL: invert --json --output FILE: stdout is not one JSON summary"; fails=$((fails + 1)); }
[ -s "$tmp/rows.csv" ] || { echo "FAIL: invert --output FILE wrote nothing"; fails=$((fails + 1)); }

# --- plot: the chart kind may follow the options; options of the other kind refused ----
expect_exit 0 "" -- "$BIN" plot --alpha 2.5 --xd 0.95 --reflux 3 --stages 6 mccabe -o "$tmp/d.svg"
expect_exit 2 "option '--residuals' belongs to 'plot model'" -- \
    "$BIN" plot mccabe --alpha 2.5 --xd 0.95 --reflux 3 --stages 6 --residuals -o "$tmp/d.svg"
expect_exit 2 "option '--alpha' belongs to 'plot mccabe'" -- \
    "$BIN" plot model "$tmp/m.json" --alpha=2.5 -o "$tmp/m.svg"

# --- Antoine sets outside their stated range: one warning per command -------------------
# demo_benzene_toluene.json states benzene's set for [287.70, 354.07] K; the ideal bubble
# curve at 101.325 kPa runs from benzene's to toluene's normal boiling point, which the
# closed form T = b/(a - log10(p/1e5)) - c of each set gives (NIST WebBook form).
"$BIN" steps --column "$BT" --xd 0.95 --reflux 3 --stages 5 --json >"$tmp/out" 2>"$tmp/err"
rc=$?
if [ "$rc" -ne 0 ] || [ "$(wc -l <"$tmp/err")" -ne 1 ]; then
    echo "FAIL: steps --column: exit $rc, want 0 and exactly one warning line"; cat "$tmp/err"
    fails=$((fails + 1))
else
    # Tolerance 0.006 K: the message prints two decimals (rounding 0.005 K) and the
    # bubble-temperature range comes from the model's table nodes x = 0 and 1, which are
    # the exact pure-component solves.
    $py - "$BT" "$tmp/err" "$tmp/out" <<'PY' || { echo "FAIL: Antoine warning text or numbers"; fails=$((fails + 1)); }
import json, math, re, sys
col = json.load(open(sys.argv[1]))
msg = open(sys.argv[2]).read()
json.load(open(sys.argv[3]))  # stdout stays one JSON document
p = col["pressure_pa"]
def tboil(a):
    return a["b"] / (a["a"] - math.log10(p / 1e5)) - a["c"]
lo = tboil(col["system"]["light"]["antoine"])
hi = tboil(col["system"]["heavy"]["antoine"])
assert msg.startswith("stagecal steps: warning: "), msg
m = re.search(r"spans \[([0-9.]+), ([0-9.]+)\] K", msg)
assert m, msg
assert abs(float(m.group(1)) - lo) < 0.006 and abs(float(m.group(2)) - hi) < 0.006, (m.groups(), lo, hi)
assert "Antoine set of benzene [287.70, 354.07] K" in msg, msg
assert "toluene [" not in msg, msg  # toluene's set covers [308.52, 384.66] K
PY
    echo "ok: Antoine warning with the bubble curve's span"
fi
expect_exit 0 "" -- "$BIN" steps --column "$BT" --xd 0.95 --reflux 3 --stages 5 --quiet
[ -s "$tmp/err" ] && { echo "FAIL: --quiet left a warning"; fails=$((fails + 1)); }
expect_exit 0 "" -- "$BIN" steps --column "$ALPHA" --xd 0.95 --reflux 3 --stages 5
[ -s "$tmp/err" ] && { echo "FAIL: constant alpha has no Antoine set, yet a warning"; fails=$((fails + 1)); }

# --- hetp and trend: a load form without --f-factor is a usage error naming the option -----
"$BIN" calibrate --quiet --form saturating-load --fits "$tmp/fits" --column "$BT" \
    "$LOGS/2025-01.csv" "$LOGS/2025-02.csv" >/dev/null 2>&1 ||
    { echo "FAIL: calibrate for the hetp/trend checks"; fails=$((fails + 1)); }
model=$(ls "$tmp"/fits/demo-bt-K-7/*.json 2>/dev/null | head -n 1)
expect_exit 2 "option '--f-factor F' is required" -- "$BIN" hetp "$model" --reflux 3
expect_exit 0 "" -- "$BIN" hetp "$model" --reflux 3 --f-factor 1.3
expect_exit 2 "option '--size': nominal packing size" -- \
    "$BIN" hetp "$model" --reflux 3 --f-factor 1.3 --packing random --size 200
expect_exit 2 "option '--f-factor F' is required" -- "$BIN" trend demo-bt-K-7 --fits "$tmp/fits" --reflux 3
# report: '-' as the output path is standard output (STYLE: '-' means stdout), no file '-'.
expect_exit 2 "options '--json' and '--output -'" -- "$BIN" report "$model" -o - --json
(cd "$tmp" && "$BIN" report "$model" -o - --quiet >"$tmp/report.html" 2>"$tmp/err")
head -n 1 "$tmp/report.html" | grep -q '^<!DOCTYPE html>' ||
    { echo "FAIL: report -o - did not write the HTML to stdout"; fails=$((fails + 1)); }
[ -e "$tmp/-" ] && { echo "FAIL: report -o - created a file named '-'"; fails=$((fails + 1)); }
# the HTML on stdout is the whole output: nothing after </html> (report prints the caution
# after its text output, not after data on stdout; the report carries its own caution)
[ "$(tail -n 1 "$tmp/report.html")" = "</html>" ] ||
    { echo "FAIL: report -o -: something after </html> on stdout"; tail -n 3 "$tmp/report.html"; fails=$((fails + 1)); }
grep -q "Caution" "$tmp/report.html" ||
    { echo "FAIL: report -o -: the HTML has no caution"; fails=$((fails + 1)); }
# written to a file: the text output names it and ends with the caution, once
expect_exit 0 "" -- "$BIN" report "$model" -o "$tmp/r.html" --quiet
grep -qx "report written to $tmp/r.html" "$tmp/out" && [ "$(grep -c '^Caution: ' "$tmp/out")" -eq 1 ] ||
    { echo "FAIL: report text output lacks its file name or one caution"; cat "$tmp/out"; fails=$((fails + 1)); }
# trend dates each fit by the last sample it used (provenance.data_last_utc).
expect_exit 0 "" -- "$BIN" trend demo-bt-K-7 --fits "$tmp/fits" --reflux 3 --f-factor 1.3 --json --quiet
$py - "$tmp/out" "$model" <<'PY' || { echo "FAIL: trend date is not the data period's end"; fails=$((fails + 1)); }
import json, sys
d = json.load(open(sys.argv[1]))
m = json.load(open(sys.argv[2]))
f = d["columns"][0]["fits"][0]
assert f["date"] == m["provenance"]["data_last_utc"], (f["date"], m["provenance"])
assert f["date"] != f["fitted_utc"]
PY

finish
