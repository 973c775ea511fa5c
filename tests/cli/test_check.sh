#!/bin/sh
# test_check.sh — `stagecal check`: exit codes (docs/cli.md: 0, 2, 65, 66), exact finding
# text on stdout, JSON shape. Usage: sh test_check.sh <stagecal-binary> <repo-root>
# Scratch files go next to the binary (inside the build tree).
set -u
bin=$1
root=$2
tmp=$(dirname "$bin")/test_check.tmp
rm -rf "$tmp" && mkdir -p "$tmp" || exit 1
fails=0

check_exit() { # name want command...
    name=$1 want=$2
    shift 2
    "$@" >"$tmp/out" 2>"$tmp/err"
    got=$?
    if [ "$got" -ne "$want" ]; then
        echo "FAIL $name: exit $got, want $want"; cat "$tmp/out" "$tmp/err"; fails=$((fails + 1))
    fi
}
check_line() { # name exact-line file
    if ! grep -qxF -- "$2" "$3"; then
        echo "FAIL $1: missing line: $2"; echo "--- got:"; cat "$3"; fails=$((fails + 1))
    fi
}

hdr='time[h],W[kmol],xD[mol/mol],xB[mol/mol],R[-]'
printf '%s\n0,10,0.95,0.5,4\n0.1,9.9,0.95,0.49,4\n0.2,9.8,0.94,0.48,4\n0.3,9.7,0.94,0.47,4\n0.4,9.6,0.93,0.46,4\n' "$hdr" >"$tmp/good.csv"
printf '%s\n0,10,0.95,0.5,4\n0.1,9.9,0.95,1.3,4\n0.2,9.8,0.94,0.48,4\n0.3,9.7,0.94,0.47,4\n0.4,9.6,0.93,0.46,4\n' "$hdr" >"$tmp/range.csv"
printf 'time[h],W[kmol],xD[mol/mol],xB[mol/mol]\n0,10,0.95,0.5\n' >"$tmp/nocol.csv"
printf '%s,foo\n0,10,0.95,0.5,4,1\n0.1,9.9,0.95,0.49,4,1\n0.2,9.8,0.94,0.48,4,1\n0.3,9.7,0.94,0.47,4,1\n0.4,9.6,0.93,0.46,4,1\n' "$hdr" >"$tmp/warn.csv"

check_exit clean 0 "$bin" check "$tmp/good.csv"
check_exit help 0 "$bin" check --help
check_line help "usage: stagecal check [--column FILE] [--min-rows N] [--json] [--quiet] RUNLOG.csv..." "$tmp/out"
check_exit no-args 2 "$bin" check
check_exit bad-option 2 "$bin" check --frobnicate "$tmp/good.csv"
check_exit bad-min-rows 2 "$bin" check --min-rows x "$tmp/good.csv"
check_exit missing-file 66 "$bin" check "$tmp/does-not-exist.csv"
check_line missing-file "stagecal check: $tmp/does-not-exist.csv: cannot open: No such file or directory" "$tmp/err"
check_exit missing-column-file 66 "$bin" check --column "$tmp/nope.json" "$tmp/good.csv"
check_exit out-of-range 65 "$bin" check "$tmp/range.csv"
check_line out-of-range "$tmp/range.csv:3: column 'xB[mol/mol]': value '1.3' outside [0, 1]" "$tmp/out"
check_exit missing-column 65 "$bin" check "$tmp/nocol.csv"
check_line missing-column "$tmp/nocol.csv:1: missing column 'R' (required: time, W, xD or xD_heavy, xB, R)" "$tmp/out"
check_exit warning-only 0 "$bin" check "$tmp/warn.csv"
check_line warning-only "warning: $tmp/warn.csv:1: unknown column 'foo' ignored (expected time, W, xD, xD_heavy, xB, R, V, Q, P, T_top, T_pot, T_reflux or run)" "$tmp/out"
check_exit too-few-rows 65 "$bin" check --min-rows 6 "$tmp/good.csv"
check_line too-few-rows "$tmp/good.csv:2: run '$tmp/good.csv' has 5 rows (expected at least 6)" "$tmp/out"
# errors in one file, a missing other: the missing input wins (66)
check_exit missing-wins 66 "$bin" check "$tmp/range.csv" "$tmp/does-not-exist.csv"
check_line missing-wins "stagecal check: 5 rows, 1 runs: 2 errors (1 input(s) not read, see above), 0 warnings" "$tmp/err"
# an input that cannot be read is an error-level finding: the summary counts it and never
# says "0 errors" beside it (issue 16, Build 6) — an empty name, a missing file beside a
# clean one, and the same in JSON ("errors" counts it, "missing" says how many)
check_exit empty-name 66 "$bin" check ''
check_line empty-name "stagecal check: the run log name is empty (expected a file name)" "$tmp/err"
check_line empty-name "stagecal check: 0 rows, 0 runs: 1 errors (1 input(s) not read, see above), 0 warnings" "$tmp/err"
check_exit missing-beside-clean 66 "$bin" check "$tmp/good.csv" "$tmp/does-not-exist.csv"
check_line missing-beside-clean "stagecal check: 5 rows, 1 runs: 1 errors (1 input(s) not read, see above), 0 warnings" "$tmp/err"
if grep -q "0 errors" "$tmp/err"; then
    echo "FAIL missing-beside-clean: '0 errors' beside a missing input"; cat "$tmp/err"; fails=$((fails + 1))
fi
check_exit empty-name-json 66 "$bin" check --json ''
if ! /usr/bin/python3 -c "import json,sys; d=json.load(open(sys.argv[1])); sys.exit(0 if d['errors'] == 1 and d['missing'] == 1 else 1)" "$tmp/out"; then
    echo "FAIL empty-name-json: errors/missing not 1/1"; cat "$tmp/out"; fails=$((fails + 1))
fi
# mass units with a column file that states molar masses
col=$root/datasets/columns/kestrel_c3_ethanol_water.json
if [ -f "$col" ]; then
    printf 'time[h],W[kg],xD[wt%%],xB[wt%%],R[-]\n0,300,95,50,4\n0.1,297,95,49,4\n0.2,294,94,48,4\n0.3,291,94,47,4\n0.4,288,93,46,4\n' >"$tmp/mass.csv"
    check_exit mass-with-column 0 "$bin" check --column "$col" "$tmp/mass.csv"
    check_exit mass-without-column 65 "$bin" check "$tmp/mass.csv"
fi
# JSON: one document, the finding and the counts
check_exit json 65 "$bin" check --json "$tmp/range.csv"
if ! /usr/bin/python3 - "$tmp/out" <<'EOF'
import json, sys
d = json.load(open(sys.argv[1]))
assert d["format"] == "stagecal-check" and d["version"] == 1, d
assert d["errors"] == 1 and d["warnings"] == 0, d
f = d["findings"][0]
assert f["severity"] == "error" and f["line"] == 3 and f["column"] == "xB[mol/mol]", f
assert f["message"].endswith(":3: column 'xB[mol/mol]': value '1.3' outside [0, 1]"), f
assert d["runs"][0]["rows"] == 5, d
EOF
then
    echo "FAIL json: shape"; fails=$((fails + 1))
fi

# ---- the run-log mode of `invert` (src/cli/invert_runlog.c) -------------------------
dcol=$root/datasets/columns/demo_alpha.json
if [ -f "$dcol" ]; then
    check_exit invert-needs-column 2 "$bin" invert "$tmp/good.csv"
    check_line invert-needs-column "stagecal invert: option '--column' is required with a run log (the equilibrium model and the uncertainties come from it)" "$tmp/err"
    check_exit invert-log-missing 66 "$bin" invert --column "$dcol" "$tmp/does-not-exist.csv"
    check_exit invert-log-csv 0 "$bin" invert --column "$dcol" "$tmp/good.csv"
    # one output row per log row, plus the header; no nan/inf text anywhere
    n=$(wc -l <"$tmp/out")
    [ "$n" -eq 6 ] || { echo "FAIL invert-log-csv: $n lines, want 6"; fails=$((fails + 1)); }
    if grep -qiE 'nan|inf' "$tmp/out"; then echo "FAIL invert-log-csv: nan/inf in output"; fails=$((fails + 1)); fi
    check_exit invert-log-json 0 "$bin" invert --column "$dcol" --json --output "$tmp/rows.csv" "$tmp/good.csv"
    if ! /usr/bin/python3 - "$tmp/out" "$tmp/rows.csv" <<'EOF2'
import csv, json, sys
d = json.load(open(sys.argv[1]))
assert d["format"] == "stagecal-invert-runlog" and d["rows"] == 5, d
assert sum(d["status_counts"].values()) == 5, d
rows = list(csv.DictReader(open(sys.argv[2])))
assert len(rows) == 5 and rows[0]["line"] == "2", rows[0]
# stages include the pot; column stages one fewer (total condenser)
for r in rows:
    if r["status"] == "ok":
        assert abs(float(r["stages"]) - 1 - float(r["column_stages"])) < 1e-7, r
EOF2
    then
        echo "FAIL invert-log-json: shape"; fails=$((fails + 1))
    fi
    # the scalar mode is unchanged
    check_exit invert-scalar 0 "$bin" invert --alpha 2.5 --xd 0.95 --xb 0.05 --reflux inf
    check_exit invert-unwritable 73 "$bin" invert --column "$dcol" --output /nonexistent/dir/x.csv "$tmp/good.csv"
fi
# the per-row note says what a stage status means (a pinch row once read "see status", as
# did an analyser at full scale): pinch rows of the invented demo log name the pinch
bcol=$root/datasets/columns/demo_benzene_toluene.json
if [ -f "$bcol" ]; then
    check_exit invert-pinch-note 0 "$bin" invert --column "$bcol" --quiet "$root/datasets/demo/logs/2025-01.csv"
    if ! grep -q ',pinch,pinch: xB is out of reach at this R with any number of stages (no count),' "$tmp/out" ||
        grep -q 'see status' "$tmp/out"; then
        echo "FAIL invert-pinch-note: pinch rows do not say pinch"; fails=$((fails + 1))
    fi
fi

rm -rf "$tmp"
[ "$fails" -eq 0 ] || { echo "$fails failure(s)"; exit 1; }
echo "test_check: all passed"
