#!/bin/sh
# test_regress.sh — `stagecal regress`: NIST StRD Misra1a through the program (certified
# values, NIST ITL Statistical Reference Datasets, nonlinear regression, Misra1a: b1, b2
# to 6 significant digits, their sd to 3, RSS and residual sd, from both NIST starting
# points and the automatic start), JSON shape, --form auto, bootstrap reproducibility,
# exit codes (docs/cli.md: 0, 2, 65, 66) with one-line messages.
# Usage: sh test_regress.sh <stagecal-binary> <repo-root>. Scratch files stay next to
# the binary (inside the build tree). JSON is read with /usr/bin/python3.
set -u
bin=$1
root=$2
py=/usr/bin/python3
tmp=$(dirname "$bin")/test_regress.tmp
rm -rf "$tmp" && mkdir -p "$tmp" || exit 1
misra=$root/datasets/reference/misra1a.csv
fails=0

fail() { echo "FAIL $*"; fails=$((fails + 1)); }

check_exit() { # name want stderr-substring command...
    name=$1 want=$2 text=$3
    shift 3
    "$@" >"$tmp/out" 2>"$tmp/err"
    got=$?
    if [ "$got" -ne "$want" ]; then
        fail "$name: exit $got, want $want"; cat "$tmp/out" "$tmp/err"; return
    fi
    if [ -n "$text" ] && ! grep -qF -- "$text" "$tmp/err"; then
        fail "$name: stderr lacks '$text'"; cat "$tmp/err"; return
    fi
    if [ "$want" -ne 0 ]; then
        [ -s "$tmp/out" ] && fail "$name: stdout not empty on error"
        [ "$(wc -l <"$tmp/err")" -eq 1 ] || { fail "$name: want one stderr line"; cat "$tmp/err"; }
    fi
    echo "ok $name"
}

# Misra1a: certified values (NIST StRD). Significant-digit checks: |got/want - 1| < 5e-6
# (6 digits) for b, 5e-3 (3 digits) for sd; RSS and residual sd to 6 digits.
misra_check() { # name json-file
    $py - "$2" <<'PY' || fail "$1: Misra1a certified values"
import json, sys
d = json.load(open(sys.argv[1]))
p = d["parameters"]
cert = [("b1", p[0]["value"], 2.3894212918E+02, 5e-6), ("b2", p[1]["value"], 5.5015643181E-04, 5e-6),
        ("sd(b1)", p[0]["se"], 2.7070075241E+00, 5e-3), ("sd(b2)", p[1]["se"], 7.2668688436E-06, 5e-3),
        ("RSS", d["rss"], 1.2455138894E-01, 5e-6), ("residual sd", d["sigma"], 1.0187876330E-01, 5e-6)]
bad = [(n, g, w) for n, g, w, t in cert if abs(g / w - 1) > t]
assert d["dof"] == 12 and d["n"] == 14 and d["form"] == "saturating", d
assert [q["name"] for q in p] == ["a", "b"]
for q in p:
    assert q["ci_low"] < q["value"] < q["ci_high"]
for k in ("r2", "aicc", "bic", "covariance", "band", "stop_reason", "envelope", "format_version"):
    assert k in d, k
if bad:
    print(bad)
    sys.exit(1)
PY
}

check_exit misra_start1 0 "" "$bin" regress "$misra" --form saturating --start 500,1e-4 --json
misra_check misra_start1 "$tmp/out"
check_exit misra_start2 0 "" "$bin" regress --form saturating --start 250,5e-4 --json "$misra"
misra_check misra_start2 "$tmp/out"
check_exit misra_auto_start 0 "" "$bin" regress "$misra" --form saturating --json
misra_check misra_auto_start "$tmp/out"
cp "$tmp/out" "$tmp/plain.json"

# a points file has no run of each point: no run-clustered covariance, and the help says why
check_exit no_covariance_option 2 "unknown option '--covariance'" \
    "$bin" regress "$misra" --form saturating --covariance cr2-run
"$bin" regress --help >"$tmp/help" 2>&1
grep -q "does not say which run each point" "$tmp/help" && grep -q "calibrate --covariance cr2-run" "$tmp/help" ||
    fail "regress --help: does not say why the run-clustered covariance is not offered"
echo "ok help_no_clustered_covariance"

# Human table: parameter lines and sigma, dof.
check_exit misra_text 0 "" "$bin" regress "$misra" --form saturating
grep -q '^  a  *238\.94212' "$tmp/out" || fail "text table lacks a = 238.94212"
grep -q '12 degrees of freedom' "$tmp/out" || fail "text lacks dof"
grep -q 'residual sigma 0\.1018787' "$tmp/out" || fail "text lacks sigma"

# stdin
check_exit misra_stdin 0 "" sh -c "\"$bin\" regress - --form saturating --json <\"$misra\""
misra_check misra_stdin "$tmp/out"

# --form auto ranks and picks saturating for Misra1a.
check_exit auto 0 "" "$bin" regress "$misra" --form auto --json
$py - "$tmp/out" <<'PY' || fail "auto: ranking"
import json, sys
d = json.load(open(sys.argv[1]))
r = d["ranking"]
assert d["form"] == "saturating" and r[0]["form"] == "saturating" and r[0]["delta_aicc"] == 0
assert all(a["aicc"] <= b["aicc"] for a, b in zip(r, r[1:]) if b["status"] == "ok")
PY

# Bootstrap: same seed → identical output, other seed → different intervals.
"$bin" regress "$misra" --form saturating --bootstrap 200 --seed 42 --json >"$tmp/b1" 2>/dev/null
"$bin" regress "$misra" --form saturating --bootstrap 200 --seed 42 --json >"$tmp/b2" 2>/dev/null
"$bin" regress "$misra" --form saturating --bootstrap 200 --seed 43 --json >"$tmp/b3" 2>/dev/null
cmp -s "$tmp/b1" "$tmp/b2" || fail "bootstrap: same seed, different output"
cmp -s "$tmp/b1" "$tmp/b3" && fail "bootstrap: other seed, same output"
grep -q '"seed": 42' "$tmp/b1" || fail "bootstrap: seed not reported"
echo "ok bootstrap reproducible"

# Robust: weights reported.
check_exit robust 0 "" "$bin" regress "$misra" --form saturating --robust bisquare --json
grep -q '"method": "bisquare"' "$tmp/out" || fail "robust: method not reported"

# Usage errors (2).
check_exit help 0 "" "$bin" regress --help
grep -q '^usage: stagecal regress' "$tmp/out" || fail "help text"
check_exit no_file 2 "points file is required" "$bin" regress --form saturating
check_exit no_form 2 "'--form' is required" "$bin" regress "$misra"
check_exit bad_form 2 "unknown form 'quadratic'" "$bin" regress "$misra" --form quadratic
check_exit bad_level 2 "'--level'" "$bin" regress "$misra" --form saturating --level 1.5
check_exit bad_robust 2 "expected huber or bisquare" "$bin" regress "$misra" --form saturating --robust l1
check_exit bad_start 2 "expected 2" "$bin" regress "$misra" --form saturating --start 1,2,3
check_exit bad_option 2 "unknown option" "$bin" regress "$misra" --form saturating --frobnicate
check_exit two_files 2 "unexpected argument" "$bin" regress "$misra" "$misra" --form constant

# Missing input (66), bad data (65).
check_exit missing 66 "cannot open" "$bin" regress "$tmp/none.csv" --form constant
printf 'R,stages\n1,2\n2,abc\n' >"$tmp/bad.csv"
check_exit bad_cell 65 "bad.csv:3: column 'stages': 'abc' is not a number" "$bin" regress "$tmp/bad.csv" --form constant
printf 'R,stages\n1,2\n' >"$tmp/short.csv"
check_exit too_few 65 "1 points for 1 parameters" "$bin" regress "$tmp/short.csv" --form constant
# A form that needs F on points without it is about the file: bad data (65), not usage.
check_exit needs_f 65 "needs the vapour load" "$bin" regress "$misra" --form saturating-load

rm -rf "$tmp"
if [ "$fails" -ne 0 ]; then echo "$fails failure(s)"; exit 1; fi
echo "all passed"
