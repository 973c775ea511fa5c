# `steps` and `invert` through the program, checked against published closed-form values
# (Fenske 1932, Ind. Eng. Chem. 24, 482; Smoker 1938, Trans. AIChE 34, 165; citations from
# memory, formulas re-derived): the JSON contract of docs/cli.md.
BIN=$1
. "$(dirname "$0")/lib.sh"
PY=/usr/bin/python3

check() { # check NAME PYTHON-EXPR-ON-d
    if "$PY" -c "import json,sys; d=json.load(open('$tmp/j')); sys.exit(0 if ($2) else 1)"; then
        echo "ok: $1"
    else
        echo "FAIL: $1"; cat "$tmp/j"; fails=$((fails + 1))
    fi
}

# Smoker check value: alpha 2.5, R 4, xD 0.95, 7 stages -> x7 = 0.2097706816 (10 s.f.)
"$BIN" steps --alpha 2.5 --xd 0.95 --reflux 4 --stages 7 --json >"$tmp/j"
check "steps: Smoker x7 (Smoker 1938)" "abs(d['xb'] - 0.2097706816) < 2e-10 and d['status'] == 'ok'"
check "steps: profile has ceil(N) = 7 entries" "len(d['profile']) == 7 and d['profile'][0]['stage'] == 1"
check "steps: stage 1 liquid 0.8837209302 (Smoker 1938 profile)" "abs(d['profile'][0]['x'] - 0.8837209302) < 1e-9"

# fractional: 6.5 stages -> 7 entries (6 whole... 5 whole column stages + partial + pot)
"$BIN" steps --alpha 2.5 --xd 0.95 --reflux inf --stages 6.5 --json >"$tmp/j"
check "steps: fractional profile ceil(6.5) = 7 entries" "len(d['profile']) == 7 and d['reflux'] == 'inf'"

# Fenske: alpha 2.5, xD 0.95, xB 0.05 -> 6.426866226 (Fenske 1932)
"$BIN" invert --alpha 2.5 --xd 0.95 --xb 0.05 --reflux inf --json >"$tmp/j"
check "invert: Fenske 6.426866226 (Fenske 1932)" "abs(d['stages'] - 6.426866226) < 1e-8 and abs(d['column_stages'] - 5.426866226) < 1e-8"

# Smoker: alpha 3, R 2, xD 0.90, x7 = 0.2160195482 -> 7 stages (Smoker 1938)
"$BIN" invert --alpha 3 --xd 0.90 --xb 0.2160195482 --reflux 2 --json >"$tmp/j"
check "invert: Smoker 7 stages (Smoker 1938)" "abs(d['stages'] - 7) < 1e-8 and d['status'] == 'ok'"

# A pinch in the way is a result: exit 0, status pinch, stages null
expect_exit 0 "" -- "$BIN" invert --alpha 2.5 --xd 0.95 --xb 0.1 --reflux 0.5 --json
cp "$tmp/out" "$tmp/j"
check "invert: pinch is a status with stages null" "d['status'] == 'pinch' and d['stages'] is None"

# R = 0: not identifiable -> invalid status, exit 0
expect_exit 0 "" -- "$BIN" invert --alpha 2.5 --xd 0.95 --xb 0.5 --reflux 0 --json
cp "$tmp/out" "$tmp/j"
check "invert: R = 0 gives status invalid" "d['status'] == 'invalid' and d['stages'] is None"
finish
