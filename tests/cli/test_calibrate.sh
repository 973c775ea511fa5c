# `calibrate` through the program on the invented demo data: JSON contract, model file
# written under fits/<column>/ and never replaced, exit codes for bad input.
BIN=$1
ROOT=$2
. "$(dirname "$0")/lib.sh"
PY=/usr/bin/python3
COL="$ROOT/datasets/columns/demo_benzene_toluene.json"
LOGS="$ROOT/datasets/demo/logs/2025-01.csv $ROOT/datasets/demo/logs/2025-02.csv $ROOT/datasets/demo/logs/2025-03.csv"

check() { # check NAME PYTHON-EXPR-ON-d (d = the JSON in $tmp/j)
    if "$PY" -c "import json,sys,math; d=json.load(open('$tmp/j')); sys.exit(0 if ($2) else 1)"; then
        echo "ok: $1"
    else
        echo "FAIL: $1"; head -c 3000 "$tmp/j"; fails=$((fails + 1))
    fi
}

"$BIN" calibrate --column "$COL" --fits "$tmp/fits" --form saturating --json --quiet $LOGS >"$tmp/j"
check "calibrate: exit 0 and one JSON document" "d['format'] == 'stagecal-calibration'"
check "calibrate: parameters a, b with se and CI" \
      "[p['name'] for p in d['parameters']] == ['a', 'b'] and all(p['ci_low'] < p['value'] < p['ci_high'] for p in d['parameters'])"
check "calibrate: evidence counts windows and samples" \
      "d['evidence']['windows'] >= 3 and d['evidence']['samples'] > d['evidence']['windows']"
check "calibrate: both fits reported, composition space carried" \
      "d['method'] == 'composition-space' and d['stage_space']['status'] == 'ok'"
check "calibrate: model file path under fits/<column>/" "'/fits/demo-bt-K-7/' in d['model_file']"
check "calibrate: both fits' standard errors from HC2 with Bell-McCaffrey dof by default" \
      "d['stage_space']['covariance'] == 'hc2-bm' and d['composition_space']['covariance'] == 'hc2-bm'"
# each parameter's interval at its own dof, at most n - p (Imbens & Kolesar 2016: K <= rank)
check "calibrate: each parameter carries its Bell-McCaffrey dof, 1 <= dof <= n - p" \
      "all(1 <= p['dof'] <= d['composition_space']['dof'] for p in d['parameters'])"
cp "$tmp/j" "$tmp/j_default"
"$BIN" calibrate --column "$COL" --fits "$tmp/fits" --form saturating --json --quiet --dry-run \
    --covariance model $LOGS >"$tmp/j"
# the covariance changes the standard errors, never the estimates
check "calibrate --covariance model: the model's, same estimates, other standard errors" \
      "d['composition_space']['covariance'] == 'model' and [p['value'] for p in d['parameters']] == [p['value'] for p in json.load(open('$tmp/j_default'))['parameters']] and [p['se'] for p in d['parameters']] != [p['se'] for p in json.load(open('$tmp/j_default'))['parameters']]"
# --covariance cr2-run: the CR2 sandwich clustered by run (windows of one run share an
# error), t at each contrast's Bell-McCaffrey dof, at most the runs with windows less one;
# the model file carries the design's runs (format version 5)
"$BIN" calibrate --column "$COL" --fits "$tmp/fits_cr2" --form saturating --json --quiet \
    --covariance cr2-run $LOGS >"$tmp/j"
check "calibrate --covariance cr2-run: both fits clustered by run, same estimates" \
      "d['stage_space']['covariance'] == 'cr2-run' and d['composition_space']['covariance'] == 'cr2-run' and [p['value'] for p in d['parameters']] == [p['value'] for p in json.load(open('$tmp/j_default'))['parameters']]"
check "calibrate --covariance cr2-run: each parameter's dof below the runs with windows" \
      "all(1 <= p['dof'] <= d['evidence']['runs'] - 1 for p in d['parameters'])"
check "calibrate --covariance cr2-run: the model file keeps the design's runs (version 5)" \
      "(lambda m: m['version'] == 5 and len(m['correlation']['design_run']) == len(m['correlation']['design']) and len(set(m['correlation']['design_run'])) >= 4)(json.load(open(d['model_file'])))"
# fewer than 4 runs with windows: hc2-bm, and a warning says so
head -184 "$ROOT/datasets/demo/logs/2025-01.csv" >"$tmp/three_runs.csv"
"$BIN" calibrate --column "$COL" --fits "$tmp/fits_cr2" --form saturating --json --quiet \
    --dry-run --covariance cr2-run "$tmp/three_runs.csv" >"$tmp/j"
check "calibrate --covariance cr2-run, 3 runs: falls back to hc2-bm with a warning" \
      "d['composition_space']['covariance'] == 'hc2-bm' and any('cr2-run needs windows from at least 4 runs, 3 run(s) have them' in w for w in d['warnings'])"
# --bootstrap: the stage-space fit's case-resampling percentile intervals, reported (they were
# computed and dropped before); the same resamples as `regress --bootstrap` on the windows'
# points file with the same seed, so the same numbers to the bit
"$BIN" calibrate --column "$COL" --form saturating --json --quiet --dry-run --bootstrap 100 \
    --points-out "$tmp/bpts.csv" $LOGS >"$tmp/j"
"$BIN" regress "$tmp/bpts.csv" --form saturating --bootstrap 100 --json >"$tmp/rj"
check "calibrate --bootstrap: the stage-space fit's percentile intervals, as regress gives them" \
      "d['stage_space']['bootstrap'] == {'B': 100, 'fitted': 100, 'seed': 1, 'resample': 'case'} and 'bootstrap' not in d['composition_space'] and [(p['boot_low'], p['boot_high'], p['boot_se']) for p in d['stage_space']['parameters']] == [(p['boot_low'], p['boot_high'], p['boot_se']) for p in json.load(open('$tmp/rj'))['parameters']] and all(p['boot_low'] < p['boot_high'] for p in d['stage_space']['parameters'])"
if "$BIN" calibrate --column "$COL" --form saturating --quiet --dry-run --bootstrap 100 $LOGS |
    grep -q "bootstrap (case resampling, B = 100, 100 fitted, seed 1), percentile intervals:"; then
    echo "ok: calibrate --bootstrap: the summary prints the intervals"
else
    echo "FAIL: calibrate --bootstrap: no intervals in the summary"; fails=$((fails + 1))
fi
# --resample run: whole runs drawn (every window of a drawn run kept), the same estimates,
# other intervals; the same doubles on 2 threads as on none
"$BIN" calibrate --column "$COL" --form saturating --json --quiet --dry-run --bootstrap 100 \
    --resample run $LOGS >"$tmp/j_run"
"$BIN" calibrate --column "$COL" --form saturating --json --quiet --dry-run --bootstrap 100 \
    --resample run --threads 2 $LOGS >"$tmp/j_run2"
cp "$tmp/j" "$tmp/j_case"
cp "$tmp/j_run" "$tmp/j"
check "calibrate --resample run: whole runs resampled, the estimates the same, other intervals" \
      "(lambda c: d['stage_space']['bootstrap']['resample'] == 'run' and 4 <= d['stage_space']['bootstrap']['runs'] <= d['evidence']['runs'] and [p['value'] for p in d['stage_space']['parameters']] == [p['value'] for p in c['stage_space']['parameters']] and [p['boot_low'] for p in d['stage_space']['parameters']] != [p['boot_low'] for p in c['stage_space']['parameters']] and all(p['boot_low'] < p['value'] < p['boot_high'] for p in d['stage_space']['parameters']))(json.load(open('$tmp/j_case')))"
check "calibrate --resample run --threads 2: the intervals of one thread" \
      "[(p['boot_low'], p['boot_high'], p['boot_se']) for p in d['stage_space']['parameters']] == [(p['boot_low'], p['boot_high'], p['boot_se']) for p in json.load(open('$tmp/j_run2'))['stage_space']['parameters']]"
if "$BIN" calibrate --column "$COL" --form saturating --quiet --dry-run --bootstrap 100 \
    --resample run $LOGS | grep -q "bootstrap (run resampling of [0-9]* runs, B = 100, "; then
    echo "ok: calibrate --resample run: the summary names it and the runs"
else
    echo "FAIL: calibrate --resample run: the summary does not say so"; fails=$((fails + 1))
fi
# fewer than 4 runs with stage counts: case resampling, and a warning says so
"$BIN" calibrate --column "$COL" --form saturating --json --quiet --dry-run --bootstrap 50 \
    --resample run "$tmp/three_runs.csv" >"$tmp/j"
check "calibrate --resample run, 3 runs: falls back to case resampling with a warning" \
      "d['stage_space']['bootstrap']['resample'] == 'case' and 'runs' not in d['stage_space']['bootstrap'] and any('bootstrap by run needs windows with a stage count from at least 4 runs, 3 run(s) have them' in w for w in d['warnings'])"
expect_exit 2 "option '--resample' needs '--bootstrap B'" -- "$BIN" calibrate --column "$COL" --resample run $LOGS
expect_exit 2 "option '--resample': 'cluster' is not a resampling" -- "$BIN" calibrate --column "$COL" --bootstrap 10 --resample cluster $LOGS
cp "$tmp/j_default" "$tmp/j"
# Demo truth (datasets/demo/README.md): a(t) = 9.5·(1 − 0.012·months), g(F) ≤ 1, so the
# saturation level of the first quarter lies between 8 and 9.5 stages.
check "calibrate: saturation level plausible for the demo truth" "8.0 < d['parameters'][0]['value'] < 9.6"
MODEL=$("$PY" -c "import json; print(json.load(open('$tmp/j'))['model_file'])")
cp "$MODEL" "$tmp/model1.json"
cp "$MODEL" "$tmp/j"
check "model file: format and version (4: it carries the fit's design and scatter function)" \
      "d['format'] == 'stagecal-model' and d['version'] == 4 and len(d['correlation']['design']) == d['evidence']['windows'] and all(len(r) == 2 for r in d['correlation']['design'])"
# the scatter function (σ of one new window by R): 1 to 3 coefficients, a square covariance,
# a range of R/(R+1) inside [0, 1], σ positive and finite over it
check "model file: scatter function well formed" \
      "(lambda s: 1 <= len(s['ln_sd_poly']) <= 3 and len(s['ln_sd_cov']) == len(s['ln_sd_poly']) and 0 <= s['range'][0] <= s['range'][1] <= 1 and all(0 < __import__('math').exp(sum(c * l**k for k, c in enumerate(s['ln_sd_poly']))) < 1e3 for l in s['range']))(d['correlation']['scatter'])"
# a form with the vapour load: predict from it without --f-factor names the form
"$BIN" calibrate --column "$COL" --fits "$tmp/f4" --form 'linear:1+1/R+F' --quiet $LOGS >/dev/null
expect_exit 2 "stagecal predict: the model's form 'linear:1+1/R+F' uses the vapour load: give '--f-factor F'" -- "$BIN" predict --model "$(ls "$tmp"/f4/demo-bt-K-7/*.json)" --charge 25 --xb0 0.5 --boilup 3.6 --reflux 3 --cut pot-x=0.15

# calibrate streams the logs run by run (twice: docs/performance.md, eleventh pass) and holds
# them whole with --report-out; invert streams them once: the per-sample rows of the three paths
# are the same bytes (a consistency check between code paths, common practice, no source)
"$BIN" calibrate --column "$COL" --fits "$tmp/fs" --form saturating --dry-run --quiet \
    --samples-out "$tmp/samples.csv" $LOGS >/dev/null
"$BIN" invert --column "$COL" --quiet --output "$tmp/inverted.csv" $LOGS >/dev/null
if [ -s "$tmp/samples.csv" ] && cmp -s "$tmp/samples.csv" "$tmp/inverted.csv"; then
    echo "ok: calibrate --samples-out equals invert --output byte for byte"
else
    echo "FAIL: calibrate --samples-out differs from invert --output"; fails=$((fails + 1))
fi
"$BIN" calibrate --column "$COL" --fits "$tmp/fs" --form saturating --dry-run --quiet \
    --samples-out "$tmp/samples-held.csv" --report-out "$tmp/held.html" $LOGS >/dev/null
if [ -s "$tmp/samples-held.csv" ] && cmp -s "$tmp/samples.csv" "$tmp/samples-held.csv"; then
    echo "ok: calibrate --samples-out held (--report-out) equals streamed byte for byte"
else
    echo "FAIL: calibrate --samples-out held differs from streamed"; fails=$((fails + 1))
fi

# a second calibration never replaces the first
"$BIN" calibrate --column "$COL" --fits "$tmp/fits" --form saturating --quiet $LOGS >/dev/null
n=$(ls "$tmp/fits/demo-bt-K-7" | wc -l)
if [ "$n" -eq 2 ] && cmp -s "$MODEL" "$tmp/model1.json"; then echo "ok: second fit is a new file"; else
    echo "FAIL: second fit: $n files"; fails=$((fails + 1)); fi

# --dry-run writes nothing
"$BIN" calibrate --column "$COL" --fits "$tmp/dry" --dry-run --quiet $LOGS >/dev/null
if [ ! -e "$tmp/dry" ]; then echo "ok: --dry-run writes nothing"; else echo "FAIL: --dry-run wrote"; fails=$((fails + 1)); fi

# bad input
printf 'time[h],W[kmol],xD[mol/mol],xB[mol/mol],R[-]\n0,10,0.9,0.5,2\n1,9,0.9,1.3,2\n2,8,0.9,0.4,2\n3,7,0.9,0.3,2\n4,6,0.9,0.2,2\n' >"$tmp/bad.csv"
expect_exit 65 "bad.csv:3: column 'xB[mol/mol]': value '1.3' outside [0, 1]" --many "$BIN" calibrate --column "$COL" --fits "$tmp/f2" --quiet "$tmp/bad.csv"
expect_exit 66 "" -- "$BIN" calibrate --column "$COL" --fits "$tmp/f2" --quiet "$tmp/missing.csv"
expect_exit 66 "" -- "$BIN" calibrate --column "$tmp/nocol.json" --fits "$tmp/f2" $LOGS
expect_exit 2 "option '--column' is required" -- "$BIN" calibrate $LOGS
expect_exit 2 "no run log given" -- "$BIN" calibrate --column "$COL"
expect_exit 2 "option '--form'" -- "$BIN" calibrate --column "$COL" --form wiggly $LOGS
expect_exit 2 "option '--method': 'best' is not a method" -- "$BIN" calibrate --column "$COL" --method best $LOGS
expect_exit 2 "option '--level': 1.5 is outside (0, 1)" -- "$BIN" calibrate --column "$COL" --level 1.5 $LOGS
# the same log twice would double the evidence: refused
expect_exit 65 "same content as" --many "$BIN" calibrate --column "$COL" --fits "$tmp/f3" --quiet "$ROOT/datasets/demo/logs/2025-01.csv" "$ROOT/datasets/demo/logs/2025-01.csv"
# do the runs differ? (docs/calibration.md §4, "Do the runs differ?"; docs/cli.md) The quick
# start's 16 windows in 14 runs leave none within the runs for 2 parameters: not tested, with
# the reason; the first eight months (52 windows in 40 runs; the demo column fouls 1.2 %/month,
# so its runs of different months differ) reject, and warn unless cr2-run is asked for
cp "$tmp/j_default" "$tmp/j"
check "calibrate: run_test not tested on the quick start, with the reason" \
      "d['run_test']['tested'] is False and d['run_test']['f'] is None and 'no window left within the runs' in d['run_test']['why'] and d['run_test']['runs'] == 14"
L8=$(ls "$ROOT"/datasets/demo/logs/*.csv | head -8)
"$BIN" calibrate --column "$COL" --form saturating --json --quiet --dry-run $L8 >"$tmp/j"
check "calibrate: run_test on eight months: F, dof, p < 0.05 and the RUNS DIFFER warning" \
      "d['run_test']['tested'] is True and d['run_test']['p'] < 0.05 and d['run_test']['dof1'] >= 1 and d['run_test']['dof2'] >= 1 and d['run_test']['why'] is None and sum('RUNS DIFFER' in w and 'cr2-run' in w for w in d['warnings']) == 1"
cp "$tmp/j" "$tmp/j_runs"
"$BIN" calibrate --column "$COL" --form saturating --json --quiet --dry-run --covariance cr2-run $L8 >"$tmp/j"
check "calibrate --covariance cr2-run: the same test, no RUNS DIFFER warning" \
      "d['run_test'] == json.load(open('$tmp/j_runs'))['run_test'] and not any('RUNS DIFFER' in w for w in d['warnings'])"
"$BIN" calibrate --column "$COL" --form saturating --dry-run $L8 >"$tmp/t" 2>/dev/null
if grep -q "^runs against windows: F = .* p = .*the runs differ beyond the windows' errors (see the warning)$" "$tmp/t" &&
    grep -q "^warning: RUNS DIFFER" "$tmp/t"; then
    echo "ok: calibrate: the summary's runs-differ line and warning"
else
    echo "FAIL: calibrate: the summary's runs-differ line and warning"; grep -i "runs" "$tmp/t"; fails=$((fails + 1))
fi
# an unwritable fits directory (a file in its place)
: >"$tmp/notadir"
expect_exit 73 "" -- "$BIN" calibrate --column "$COL" --fits "$tmp/notadir" --quiet $LOGS
finish
