#!/bin/sh
# test_predict.sh — `stagecal predict`: exit codes (docs/cli.md), the Rayleigh case through
# the whole program, mass balance and shape of --json, CSV output, plan file, envelope
# warning, reproducible band, the latent heat a model file records, the dynamic model.
# Usage: sh test_predict.sh <stagecal-binary> <repo-root>
# The model file is the INVENTED demo model written by tests/tool_batch_model.c.
# Scratch files go next to the binary (inside the build tree).
set -u
bin=$1
root=$2
py=/usr/bin/python3
tool=$(dirname "$bin")/tests/tool_batch_model
tmp=$(dirname "$bin")/test_predict.tmp
rm -rf "$tmp" && mkdir -p "$tmp" || exit 1
fails=0

check_exit() { # name want command...
    name=$1 want=$2
    shift 2
    "$@" >"$tmp/out" 2>"$tmp/err"
    got=$?
    if [ "$got" -ne "$want" ]; then
        echo "FAIL $name: exit $got, want $want"; cat "$tmp/out" "$tmp/err"; fails=$((fails + 1))
    else
        echo "ok $name"
    fi
}
check_py() { # name python-expression-over-json-doc-d (file $tmp/out)
    if ! "$py" -c "import json,math,sys; d=json.load(open('$tmp/out')); sys.exit(0 if ($2) else 1)"; then
        echo "FAIL $1: $2"; fails=$((fails + 1))
    else
        echo "ok $1"
    fi
}

model=$("$tool" "$tmp/fits") || { echo "FAIL: cannot write the demo model"; exit 1; }
common="--model $model --charge 10 --xb0 0.5 --boilup 2.4"

check_exit help 0 "$bin" predict --help
check_exit no-model 2 "$bin" predict --charge 10 --xb0 0.5 --boilup 2 --reflux 3 --cut pot-x=0.2
check_exit two-policies 2 "$bin" predict $common --reflux 3 --xd-setpoint 0.9 --cut pot-x=0.2
check_exit no-cut 2 "$bin" predict $common --reflux 3
check_exit bad-cut 2 "$bin" predict $common --reflux 3 --cut pot-y=0.2
check_exit cut-domain 2 "$bin" predict $common --reflux 3 --cut pot-x=1.5
check_exit missing-model 66 "$bin" predict --model "$tmp/none.json" --charge 10 --xb0 0.5 \
    --boilup 2 --reflux 3 --cut pot-x=0.2
check_exit missing-plan 66 "$bin" predict $common --plan "$tmp/none.json"

# R = 0: the law gives < 1 stage, raised to the pot alone → Rayleigh's equation.
# Rayleigh 1902, Phil. Mag. (6) 4, 521, closed form for constant α (α = 2.5, 0.5 → 0.2): ln(W0/W) = 1.394199870, mean distillate
# 0.5989528362; 1e-8 relative (the library integrates to ~1e-10; 10 s.f. given).
check_exit rayleigh 0 "$bin" predict $common --reflux 0 --cut pot-x=0.2 --samples 0 --json
check_py rayleigh-lnw "abs(math.log(10/d['pot_end_kmol']) - 1.394199870) < 1.4e-8"
check_py rayleigh-mean "abs(d['cuts'][0]['x_mean'] - 0.5989528362) < 6e-9"
check_py rayleigh-warns "d['extrapolated'] and any('below the lowest' in w for w in d['warnings'])"
if grep -q "below the lowest reflux ratio calibrated" "$tmp/err"; then echo "ok warning on stderr"
else echo "FAIL: no envelope warning on stderr"; fails=$((fails + 1)); fi
# at R = 0 all boil-up is distillate: batch time = (W0 − W)/V (closed form)
check_py rayleigh-time "abs(d['batch_time_h'] - (10 - d['pot_end_kmol'])/2.4) < 1e-9"

# constant distillate with two receivers; mass balance over the summary (1e-9 rel.)
check_exit setpoint 0 "$bin" predict $common --xd-setpoint 0.95 --reflux-max 20 \
    --cut product:reflux=20 --cut slop:pot-x=0.02 --latent 35 --samples 40 --seed 7 --json
cp "$tmp/out" "$tmp/setpoint1.json"
check_py balance "abs(sum(c['amount_kmol']*c['x_mean'] for c in d['cuts']) + d['pot_end_kmol']*d['pot_end_x'] - 5) < 5e-9"
check_py set-point-held "abs(d['cuts'][0]['x_mean'] - 0.95) < 1e-9 and d['cuts'][0]['stop'] == 'target' and d['cuts'][1]['amount_kmol'] > 0"
check_py band-brackets "all(c['band']['t_end_h']['low'] <= c['t_end_h'] <= c['band']['t_end_h']['high'] for c in d['cuts'])"
check_py energy "abs(d['energy_gj'] - 2.4/3.6*d['batch_time_h']*3600*35000/1e9) < 1e-9*d['energy_gj']"
check_py shape "d['format'] == 'stagecal-predict' and d['seed'] == 7 and d['band']['samples'] == 40 and len(d['trajectory']) > 50"
check_exit setpoint-again 0 "$bin" predict $common --xd-setpoint 0.95 --reflux-max 20 \
    --cut product:reflux=20 --cut slop:pot-x=0.02 --latent 35 --samples 40 --seed 7 --json
if cmp -s "$tmp/out" "$tmp/setpoint1.json"; then echo "ok same seed, same document"
else echo "FAIL: same seed gave a different document"; fails=$((fails + 1)); fi

# --run-scatter on a model file without a scatter function (no var_ratio): the process part
# cannot be separated, so --scatter-part process draws the whole sigma, said in the JSON and
# on stderr; the default (window) draws it without a warning; the band is wider than the mean
# law's; --scatter-part alone is a usage error (docs/cli.md)
check_exit scatter-part-alone 2 "$bin" predict $common --reflux 4 --cut pot-x=0.2 --samples 40 \
    --scatter-part window
check_exit run-scatter-process 0 "$bin" predict $common --reflux 4 --cut pot-x=0.2 --samples 40 \
    --seed 7 --run-scatter --scatter-part process --json
check_py run-scatter-process-part "d['band']['scatter_part'] == 'window' and 'whole scatter' in d['band']['covers']"
if grep -q "calibrate again to separate it" "$tmp/err"; then echo "ok no var_ratio: warned"
else echo "FAIL: no warning that the scatter cannot be separated"; fails=$((fails + 1)); fi
cp "$tmp/out" "$tmp/scatter-process.json"
check_exit run-scatter 0 "$bin" predict $common --reflux 4 --cut pot-x=0.2 --samples 40 --seed 7 \
    --run-scatter --json
check_py run-scatter-part "d['band']['scatter_part'] == 'window'"
if grep -q "calibrate again" "$tmp/err"; then echo "FAIL: the default (window) warned"; fails=$((fails + 1))
else echo "ok the default draws the whole scatter without a warning"; fi
if cmp -s "$tmp/out" "$tmp/scatter-process.json"; then echo "ok no var_ratio: process = window"
else echo "FAIL: process without var_ratio differs from window"; fails=$((fails + 1)); fi
cp "$tmp/out" "$tmp/scatter.json"
check_exit no-run-scatter 0 "$bin" predict $common --reflux 4 --cut pot-x=0.2 --samples 40 --seed 7 --json
check_py no-run-scatter-narrower "'scatter_part' not in d['band'] and (d['band']['batch_time_h']['high'] - d['band']['batch_time_h']['low']) < (lambda b: b['high'] - b['low'])(json.load(open('$tmp/scatter.json'))['band']['batch_time_h'])"

# CSV trajectory
check_exit csv 0 "$bin" predict $common --reflux 4 --cut pot-x=0.2 --samples 0 --output "$tmp/traj.csv"
if head -1 "$tmp/traj.csv" | grep -qxF 'time[h],W[kmol],xB[mol/mol],xD[mol/mol],R[-],stages[-],cut,cut_amount[kmol],cut_x[mol/mol],distilled[kmol],outside_envelope'
then echo "ok csv header"; else echo "FAIL csv header"; head -1 "$tmp/traj.csv"; fails=$((fails + 1)); fi
check_exit csv-unwritable 73 "$bin" predict $common --reflux 4 --cut pot-x=0.2 --samples 0 \
    --output "$tmp/no/such/dir/traj.csv"

# plan file (schedule by pot composition, three receivers)
cat >"$tmp/plan.json" <<'PLAN'
{"format": "stagecal-plan", "version": 1, "comment": "INVENTED demo plan",
 "charge": {"amount_kmol": 10, "x_light": 0.5}, "boilup_kmol_h": 2.4,
 "policy": {"kind": "schedule", "by": "pot_x",
            "steps": [{"from": 0.5, "reflux": 3}, {"from": 0.3, "reflux": 6}, {"from": 0.15, "reflux": 12}]},
 "cuts": [{"name": "heads", "until": "time", "value": 0.25},
          {"name": "product", "until": "mean-x", "value": 0.98},
          {"name": "slop", "until": "pot-x", "value": 0.005}]}
PLAN
check_exit plan 0 "$bin" predict --model "$model" --plan "$tmp/plan.json" --samples 0 --json
check_py plan-cuts "[c['name'] for c in d['cuts']] == ['heads', 'product', 'slop'] and abs(d['cuts'][0]['t_end_h'] - 0.25) < 1e-12 and abs(d['pot_end_x'] - 0.005) < 1e-12 and d['cuts'][2]['amount_kmol'] > 0"
printf '{"format": "stagecal-plan", "version": 1, "policy": {"kind": "constant-reflux", "reflx": 3}}' >"$tmp/typo.json"
check_exit plan-typo 65 "$bin" predict $common --plan "$tmp/typo.json" --cut pot-x=0.2

# An NRTL model with only --model: the model file records the full system
# (docs/model-file.md). The system is copied from the INVENTED demo column
# datasets/columns/kestrel_c3_ethanol_water.json (ethanol–water, an NRTL set published for 1 atm)
# into the demo model by an independent writer (Python, canonical checksum as in
# docs/model-file.md); "old" is the same file as written before the full system was
# recorded (kind only).
column="$root/datasets/columns/kestrel_c3_ethanol_water.json"
cat >"$tmp/embed.py" <<'PY'
import hashlib, json, sys
def canon(v):
    if v is None: return "null"
    if v is True: return "true"
    if v is False: return "false"
    if isinstance(v, int): return str(v)
    if isinstance(v, float):
        t = "%.17g" % v
        return t if any(c in t for c in ".eE") else t + ".0"
    if isinstance(v, str): return json.dumps(v, ensure_ascii=True)
    if isinstance(v, list): return "[" + ",".join(canon(x) for x in v) + "]"
    return "{" + ",".join(canon(k) + ":" + canon(v[k]) for k in sorted(v)) + "}"
src, col, dst, full = sys.argv[1], sys.argv[2], sys.argv[3], sys.argv[4] == "full"
doc, c = json.load(open(src)), json.load(open(col))
doc.pop("checksum")
s, p = c["system"], {}
if full:
    p["pressure_pa"] = float(c["pressure_pa"])
    for side in ("light", "heavy"):
        for k in ("a", "b", "c", "t_min_k", "t_max_k"):
            p["antoine_%s_%s" % (side, k)] = float(s[side]["antoine"][k])
    for k in ("tau12_a", "tau12_b_k", "tau21_a", "tau21_b_k", "alpha12"):
        p[k] = float(s["model"][k])
doc["system"] = {"light": s["light"]["name"], "heavy": s["heavy"]["name"],
                 "equilibrium": {"model": s["model"]["kind"], "parameters": p}}
doc["checksum"] = {"algorithm": "sha256",
                   "value": hashlib.sha256(canon(doc).encode("ascii")).hexdigest()}
json.dump(doc, open(dst, "w"), indent=2, sort_keys=True)
PY
"$py" "$tmp/embed.py" "$model" "$column" "$tmp/nrtl.json" full &&
    "$py" "$tmp/embed.py" "$model" "$column" "$tmp/nrtl-old.json" old ||
    { echo "FAIL: cannot write the NRTL model files"; fails=$((fails + 1)); }
nrtl="--charge 10 --xb0 0.3 --boilup 2.4 --reflux 4 --cut pot-x=0.1 --latent 40 --samples 20 --json"
check_exit nrtl-model-only 0 "$bin" predict --model "$tmp/nrtl.json" $nrtl
cp "$tmp/out" "$tmp/nrtl-only.json"
# the distillate cannot pass the ethanol–water azeotrope, x = 0.894 at 1 atm (handbook
# VLE table, Perry's Chemical Engineers' Handbook): shows the NRTL model was used (the α = 2.5 demo model passes it, below)
check_py nrtl-below-azeotrope "max(r['xd'] for r in d['trajectory']) < 0.894 and d['cuts'][0]['amount_kmol'] > 0"
check_exit nrtl-column 0 "$bin" predict --model "$tmp/nrtl.json" --column "$column" $nrtl
if cmp -s "$tmp/out" "$tmp/nrtl-only.json"; then echo "ok --model alone equals --column"
else echo "FAIL: --model alone and --column gave different documents"; fails=$((fails + 1)); fi
check_exit alpha-same-batch 0 "$bin" predict --model "$model" $nrtl
check_py alpha-passes-0.894 "max(r['xd'] for r in d['trajectory']) > 0.894"
check_exit nrtl-old-file 65 "$bin" predict --model "$tmp/nrtl-old.json" $nrtl
if grep -q "parameter 'pressure_pa' is missing" "$tmp/err" && grep -q "column file" "$tmp/err"
then echo "ok old file names what is missing"
else echo "FAIL: old file message"; cat "$tmp/err"; fails=$((fails + 1)); fi

# The latent heat travels in the model file (docs/model-file.md, system.latent_heat_j_mol).
# A model calibrated on the INVENTED demo column datasets/columns/demo_benzene_toluene.json
# (its latent_heat_j_mol is a round demo value) and the INVENTED log 2025-01.csv;
# `predict --model` alone must then give the boil-up energy = moles boiled up × λ, with
# moles boiled up = boil-up rate × batch time (V constant; definition, docs/methods.md) and
# λ read here from the column file, not from anything stagecal printed (the human line
# below: 32 kJ/mol = the column file's 32000 J/mol). Tolerance 1e-12 relative: a product
# of three doubles and unit factors (a few ulps), 17 digits in JSON.
bt="$root/datasets/columns/demo_benzene_toluene.json"
check_exit bt-calibrate 0 "$bin" calibrate --column "$bt" --fits "$tmp/btfits" --quiet \
    "$root/datasets/demo/logs/2025-01.csv"
btmodel=$(ls "$tmp"/btfits/*/*.json 2>/dev/null | head -1)
lam="json.load(open('$bt'))['system']['latent_heat_j_mol']"
if "$py" -c "import json,sys; c=json.load(open('$bt'))['system']; s=json.load(open('$btmodel'))['system']
sys.exit(0 if s['latent_heat_j_mol'] == c['latent_heat_j_mol'] and s['molar_mass_light_kg_mol'] == c['light']['molar_mass_kg_mol'] and s['molar_mass_heavy_kg_mol'] == c['heavy']['molar_mass_kg_mol'] else 1)"
then echo "ok model file records the column file's latent heat and molar masses"
else echo "FAIL: model file system data differ from the column file's"; fails=$((fails + 1)); fi
bt_run="--model $btmodel --charge 10 --xb0 0.5 --boilup 2.4 --reflux 4 --cut pot-x=0.2 --samples 0"
check_exit bt-model-only 0 "$bin" predict $bt_run --json
check_py bt-energy-model "abs(d['energy_gj'] - d['charge']['boilup_kmol_h']*1000*d['batch_time_h']*$lam/1e9) < 1e-12*d['energy_gj'] and d['batch_time_h'] > 0"
check_py bt-latent-source "d['latent_heat_source'] == 'model-file' and abs(d['latent_heat_kj_mol'] - $lam/1000) < 1e-15*d['latent_heat_kj_mol']"
check_exit bt-human 0 "$bin" predict $bt_run
if grep -q "^boil-up energy .* GJ (latent heat 32 kJ/mol, from the model file)$" "$tmp/out"
then echo "ok human output names the model file"
else echo "FAIL: human energy line"; cat "$tmp/out"; fails=$((fails + 1)); fi
# --latent overrides the model's (35 kJ/mol, an arbitrary test value)
check_exit bt-latent-option 0 "$bin" predict $bt_run --latent 35 --json
check_py bt-energy-option "d['latent_heat_source'] == 'option' and abs(d['energy_gj'] - d['charge']['boilup_kmol_h']*1000*d['batch_time_h']*35000/1e9) < 1e-12*d['energy_gj']"
# with --column the column file is the source: its λ, or none (demo_alpha.json states none)
check_exit bt-column 0 "$bin" predict $bt_run --column "$bt" --json
check_py bt-energy-column "d['latent_heat_source'] == 'column-file' and abs(d['energy_gj'] - d['charge']['boilup_kmol_h']*1000*d['batch_time_h']*$lam/1e9) < 1e-12*d['energy_gj']"
check_exit bt-column-without-latent 0 "$bin" predict $bt_run \
    --column "$root/datasets/columns/demo_alpha.json" --json
check_py bt-no-latent "d['energy_gj'] is None and d['latent_heat_source'] is None"
# a model file that records no latent heat (the demo model of tool_batch_model)
check_exit old-model-no-latent 0 "$bin" predict $common --reflux 4 --cut pot-x=0.2 --samples 0 --json
check_py old-model-energy-unknown "d['energy_gj'] is None and d['latent_heat_kj_mol'] is None"

# The dynamic model (docs/methods.md, "Dynamic batch prediction"): the INVENTED demo column
# datasets/columns/demo_alpha.json (α = 2.5) with a holdup of 4 % of the 10 kmol charge on
# its column and 0.1 kmol in its drum, written here.
"$py" -c "import json; c=json.load(open('$root/datasets/columns/demo_alpha.json')); c['holdup']={'column_mol': 400, 'reflux_drum_mol': 100}; json.dump(c, open('$tmp/held.json','w'))"
dyn="$common --reflux 3 --cut product:mean-x=0.95 --cut slop:pot-x=0.1 --samples 0"
check_exit dyn-default 0 "$bin" predict $dyn --column "$tmp/held.json" --json
check_py dyn-is-default "d['dynamics'] == 'holdup' and d['column_holdup']['column_kmol'] == 0.4 and d['startup_h'] > 0 and abs(d['cuts'][0]['t_start_h'] - d['startup_h']) < 1e-12"
check_py dyn-startup-rows "all(r['reflux'] is None for r in d['trajectory'] if r.get('startup')) and any(r.get('startup') for r in d['trajectory'])"
# overall balance from the summary: charge = pot + column + drum + receivers (1e-9 relative;
# every member is integrated, 17 digits in JSON)
check_py dyn-balance "abs(d['pot_end_kmol'] + 0.5 + sum(c['amount_kmol'] for c in d['cuts']) - 10) < 1e-8"
check_py dyn-light-balance "d['mass_balance_error'] < 1e-9"
# the first receiver is delayed against the quasi-steady batch printed beside it
check_py dyn-delay "d['cuts'][0]['delay_h'] > 0 and abs(d['cuts'][0]['delay_h'] - (d['cuts'][0]['t_end_h'] - d['cuts'][0]['quasi_steady']['t_end_h'])) < 1e-12"
check_exit dyn-quasi 0 "$bin" predict $dyn --column "$tmp/held.json" --dynamics quasi-steady --json
cp "$tmp/out" "$tmp/quasi.json"
check_py dyn-quasi-is "d['dynamics'] == 'quasi-steady' and d['column_holdup'] == 'neglected'"
check_exit dyn-no-holdup 0 "$bin" predict $dyn --column "$root/datasets/columns/demo_alpha.json" --json
check_py dyn-same-as-no-holdup "d['dynamics'] == 'quasi-steady' and d['batch_time_h'] == json.load(open('$tmp/quasi.json'))['batch_time_h']"
check_exit dyn-startup-time 0 "$bin" predict $dyn --column "$tmp/held.json" --startup-time 1.5 --json
check_py dyn-startup-1.5h "abs(d['startup_h'] - 1.5) < 1e-12"
# constant distillate: the start-up ends when the distillate reaches the set point (event
# located to 1e-13 in t·V/W0)
check_exit dyn-setpoint 0 "$bin" predict $common --xd-setpoint 0.95 --reflux-max 20 \
    --cut product:reflux=20 --cut slop:pot-x=0.02 --samples 0 --column "$tmp/held.json" --json
check_py dyn-setpoint-startup "abs(d['xd_startup'] - 0.95) < 1e-9 and d['startup_h'] > 0"
# the band of the dynamic model draws the holdup too (u = 0.25 when the file states none)
check_exit dyn-band 0 "$bin" predict $common --reflux 3 --cut product:mean-x=0.95 --cut slop:pot-x=0.1 \
    --samples 20 --column "$tmp/held.json" --json
check_py dyn-band-holdup "d['band']['holdup_u_rel'] == 0.25 and d['band']['ok'] == 20 and d['band']['batch_time_h']['low'] < d['batch_time_h'] < d['band']['batch_time_h']['high']"
check_exit dyn-text 0 "$bin" predict $dyn --column "$tmp/held.json"
if grep -q "^start-up at total reflux: .* h to the first draw" "$tmp/out" && grep -q "smearing (sd of x)" "$tmp/out" &&
    [ "$(grep -c '^Caution: ' "$tmp/out")" -eq 1 ]; then echo "ok dynamic text output"
else echo "FAIL: dynamic text output"; cat "$tmp/out"; fails=$((fails + 1)); fi
check_exit dyn-needs-holdup 2 "$bin" predict $dyn --column "$root/datasets/columns/demo_alpha.json" --dynamics holdup
grep -q "needs the column's liquid holdup" "$tmp/err" || { echo "FAIL: dyn-needs-holdup message"; fails=$((fails + 1)); }
check_exit dyn-startup-quasi 2 "$bin" predict $dyn --startup-xd 0.9
check_exit dyn-startup-both 2 "$bin" predict $dyn --column "$tmp/held.json" --startup-xd 0.9 --startup-time 1

rm -rf "$tmp"
if [ "$fails" -ne 0 ]; then echo "$fails failure(s)"; exit 1; fi
echo "all passed"
