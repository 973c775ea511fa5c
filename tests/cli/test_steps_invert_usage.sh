# Bad command-line input to `steps` and `invert`: exit 2, one message on stderr naming the
# option and what was expected, nothing on stdout (the exit codes of docs/cli.md).
BIN=$1
. "$(dirname "$0")/lib.sh"

I="$BIN invert --alpha 2.5 --reflux 4"
S="$BIN steps --alpha 2.5 --reflux 4"
expect_exit 2 "option '--xd': 1.2 is outside (0, 1)" -- $I --xd 1.2 --xb 0.2
expect_exit 2 "option '--xd': 0 is outside (0, 1)" -- $I --xd 0 --xb 0.2
expect_exit 2 "option '--xb': -0.1 is outside (0, 1)" -- $I --xd 0.9 --xb -0.1
expect_exit 2 "option '--xb': 0.95 is not below --xd 0.9" -- $I --xd 0.9 --xb 0.95
expect_exit 2 "option '--xb': 0.9 is not below --xd 0.9" -- $I --xd 0.9 --xb 0.9
expect_exit 2 "option '--alpha': 0.9 is outside (1, inf)" -- $BIN invert --alpha 0.9 --reflux 4 --xd 0.9 --xb 0.1
expect_exit 2 "option '--alpha': 1 is outside (1, inf)" -- $BIN invert --alpha 1 --reflux 4 --xd 0.9 --xb 0.1
expect_exit 2 "option '--kvalue': 0.5 is outside (1, inf)" -- $BIN invert --kvalue 0.5 --reflux 4 --xd 0.1 --xb 0.01
expect_exit 2 "option '--reflux': -1 is negative" -- $BIN invert --alpha 2 --reflux -1 --xd 0.9 --xb 0.1
expect_exit 2 "option '--murphree': 1.5 is outside (0, 1]" -- $I --xd 0.9 --xb 0.1 --murphree 1.5
expect_exit 2 "option '--murphree': 0 is outside (0, 1]" -- $I --xd 0.9 --xb 0.1 --murphree 0
expect_exit 2 "option '--stages': 0.5 is below 1" -- $S --xd 0.9 --stages 0.5
expect_exit 2 "option '--xd': 'nan' is not a number" -- $I --xd nan --xb 0.1
expect_exit 2 "option '--xd': '1e' is not a number" -- $I --xd 1e --xb 0.1
expect_exit 2 "option '--xd': '0.9x' is not a number" -- $I --xd 0.9x --xb 0.1
expect_exit 2 "option '--xb': '' is not a number" -- $I --xd 0.9 --xb ""
expect_exit 2 "option '--reflux': 'infinite' is not a number" -- $BIN invert --alpha 2 --reflux infinite --xd 0.9 --xb 0.1
expect_exit 2 "option '--stages': 'seven' is not a number" -- $S --xd 0.9 --stages seven
expect_exit 2 "unknown option '--foo'" -- $I --xd 0.9 --xb 0.1 --foo
expect_exit 2 "unknown option '-x'" -- $I --xd 0.9 --xb 0.1 -x
expect_exit 2 "option '--stages' needs a value" -- $S --xd 0.9 --stages
expect_exit 2 "option '--xb' is required" -- $I --xd 0.9
expect_exit 2 "one of '--alpha', '--kvalue' or '--column' is required" -- $BIN invert --xd 0.9 --xb 0.1 --reflux 2
# one censored reading ("--xd '>v'"): the bad variants name the number left after the mark
expect_exit 2 "option '--xd': '' is not a number (expected a mole fraction)" -- $I --xd '>' --xb 0.2
expect_exit 2 "option '--xd': '>3' is not a number (expected a mole fraction)" -- $I --xd '>>3' --xb 0.2
expect_exit 2 "option '--xd': 'abc' is not a number (expected a mole fraction)" -- $I --xd '<abc' --xb 0.2
expect_exit 2 "option '--xb': -1 is outside (0, 1)" -- $I --xd 0.99 --xb '>-1'
# and the answer is one-sided: without stated uncertainties the bound is the count at the limit
# itself, the plain count of --xd 0.9999 (so the two lines carry the same number)
$I --xd '>0.9999' --xb 0.2 >"$tmp/b" 2>&1
$I --xd 0.9999 --xb 0.2 >"$tmp/p" 2>&1
b=$(sed -n 's/^stages (the pot included): AT LEAST \([0-9.]*\) (one-sided 95 %.*/\1/p' "$tmp/b")
p=$(sed -n 's/^stages (the pot included): \([0-9.]*\)$/\1/p' "$tmp/p")
if [ -n "$b" ] && [ "$b" = "$p" ]; then echo "ok: invert --xd '>0.9999': at least $b"
else echo "FAIL: invert --xd '>0.9999': '$b' vs plain '$p'"; cat "$tmp/b"; fails=$((fails + 1)); fi
$I --xd '>0.9999' --xb 0.2 --json >"$tmp/j"
if grep -q '"stages_high": null' "$tmp/j" && grep -q '"status": "censored"' "$tmp/j" &&
    grep -q "\"stages_low\": ${p%??}" "$tmp/j"; then echo "ok: invert --xd '>0.9999' --json: high end null"
else echo "FAIL: invert --xd '>0.9999' --json"; cat "$tmp/j"; fails=$((fails + 1)); fi
expect_exit 2 "exclude each other" -- $BIN invert --alpha 2 --kvalue 3 --xd 0.9 --xb 0.1 --reflux 2
expect_exit 2 "'frobnicate' is not a command" -- $BIN frobnicate
expect_exit 0 "" -- $BIN invert --help
expect_exit 0 "" -- $BIN steps --help
expect_exit 0 "" -- $BIN --version
finish
