# predict takes the charge, its composition and the boil-up in the units of the run logs
# (issue 16 item 3): kg with wt% and a reboiler duty in kW must give the batch that kmol,
# mol/mol and kmol/h give. The equivalent numbers are computed here in Python from the column
# file's molar masses and latent heat (x -> w by w = x·M_l/(x·M_l + (1 − x)·M_h), amount
# kmol·M, duty V·λ), independently of the program. Tolerance: 1e-6 relative (the printed
# inputs carry 12 significant digits; the batch integration is deterministic).
BIN=$1
ROOT=$2
. "$(dirname "$0")/lib.sh"
COL="$ROOT/datasets/columns/demo_benzene_toluene.json"
MODEL="$ROOT/tests/planner_model.json"
set -- $(/usr/bin/python3 -c 'import json,sys
c = json.load(open(sys.argv[1])); s = c["system"]
ml, mh, lam = s["light"]["molar_mass_kg_mol"], s["heavy"]["molar_mass_kg_mol"], s["latent_heat_j_mol"]
x, n, v = 0.45, 20.0, 3.0  # mol/mol, kmol, kmol/h
print("%.12gwt%%" % (100 * x * ml / (x * ml + (1 - x) * mh)), "%.12gkg" % (n * 1000 * (x * ml + (1 - x) * mh)),
      "%.12gkW" % (v / 3.6 * lam / 1000))' "$COL")
WT=$1 KG=$2 KW=$3
common="--model $MODEL --column $COL --reflux 3 --cut pot-x=0.15 --samples 0 --json --quiet"
"$BIN" predict $common --charge 20 --xb0 0.45 --boilup 3 >"$tmp/mol.json" 2>"$tmp/err" ||
    { echo "FAIL: predict in kmol"; cat "$tmp/err"; fails=$((fails + 1)); }
"$BIN" predict $common --charge "$KG" --xb0 "$WT" --boilup "$KW" >"$tmp/mass.json" 2>"$tmp/err" ||
    { echo "FAIL: predict in kg/wt%/kW"; cat "$tmp/err"; fails=$((fails + 1)); }
if /usr/bin/python3 -c 'import json,sys
a, b = (json.load(open(f)) for f in sys.argv[1:3])
def close(p, q): return abs(p - q) <= 1e-6 * max(abs(p), abs(q), 1e-12)
ok = close(a["batch_time_h"], b["batch_time_h"]) and close(a["pot_end_kmol"], b["pot_end_kmol"]) \
     and close(a["charge"]["amount_kmol"], 20) and close(b["charge"]["amount_kmol"], 20) \
     and close(b["charge"]["x_light"], 0.45) and close(b["charge"]["boilup_kmol_h"], 3)
sys.exit(0 if ok else 1)' "$tmp/mol.json" "$tmp/mass.json"; then
    echo "ok: $KG at $WT boiled with $KW gives the batch of 20 kmol at 0.45 with 3 kmol/h"
else
    echo "FAIL: the batches differ"; head -c 600 "$tmp/mol.json" "$tmp/mass.json"; fails=$((fails + 1))
fi
# the text output says what was converted
"$BIN" predict --model "$MODEL" --column "$COL" --reflux 3 --cut pot-x=0.15 --samples 0 --quiet \
    --charge "$KG" --xb0 "$WT" --boilup "$KW" >"$tmp/text.txt" 2>&1
grep -q "^inputs converted: xb0 $WT = 0.45 mol/mol; charge $KG = 20 kmol; boil-up $KW = 3 kmol/h" \
    "$tmp/text.txt" && echo "ok: the text names the conversions" ||
    { echo "FAIL: no conversion line"; head -5 "$tmp/text.txt"; fails=$((fails + 1)); }
# refusals name the option and what is expected (usage errors, exit 2)
expect_exit 2 "option '--charge': unknown unit 'kgs' (expected kmol, mol, kg or lb)" -- \
    "$BIN" predict $common --charge 2000kgs --xb0 0.45 --boilup 3
expect_exit 2 "option '--boilup': a mass boil-up needs the vapour's molar mass" -- \
    "$BIN" predict $common --charge 20 --xb0 0.45 --boilup 300kg/h
expect_exit 2 "option '--xb0': '120wt%' is outside (0, 100 wt%)" -- \
    "$BIN" predict $common --charge 20 --xb0 120wt% --boilup 3
expect_exit 2 "option '--xb0': a mass fraction needs the molar masses" -- \
    "$BIN" predict --model "$MODEL" --alpha 2.4 --reflux 3 --cut pot-x=0.15 --samples 0 --charge 20 \
    --xb0 40wt% --boilup 3
finish
