# One vocabulary: every option with one meaning has one spelling across the commands.
# The --help of every subcommand (the list in 'stagecal --help') is parsed and checked:
# a quantity named in an option's help (the F-factor, the confidence level, the Murphree
# efficiency, ...) is always set by the same option; the options shared by several
# commands carry the same help line everywhere (they come from one table entry); the old
# spellings are not offered any more, but still work with a warning that names the new
# one; the commands that write one output file take it as -o/--output.
BIN=$1
ROOT=$2
. "$(dirname "$0")/lib.sh"
PY=/usr/bin/python3

cmds=$("$BIN" --help | awk '/^commands:/ {on = 1; next} on && /^  [a-z]/ {print $1}')
[ -n "$cmds" ] || { echo "FAIL: no command list in 'stagecal --help'"; exit 1; }
for c in $cmds; do
    "$BIN" "$c" --help >"$tmp/help.$c" || { echo "FAIL: $c --help exits non-zero"; fails=$((fails + 1)); }
done

if "$PY" - "$tmp" $cmds <<'PY'
import re, sys
tmp, cmds = sys.argv[1], sys.argv[2:]
opt = re.compile(r'^  (?:-(\w), )?--([a-z0-9-]+)(?: (\S+))?(?:\s+(.*))?$')
table = {}  # command -> {long: (short, help)}
for c in cmds:
    rows, last = {}, None
    for line in open(f'{tmp}/help.{c}'):
        line = line.rstrip('\n')
        m = opt.match(line)
        if m:
            last = m.group(2)
            rows[last] = (m.group(1), (m.group(4) or '').strip())
        elif last and re.match(r'^ {20,}\S', line):  # continuation of a help text
            s, h = rows[last]
            rows[last] = (s, (h + ' ' + line.strip()).strip())
        else:
            last = None
    table[c] = rows
bad = []
# 1. a quantity named in the help is set by one spelling (regex on help -> spelling)
concepts = [
    (r'(F-factor|vapour load) \[Pa\^0\.5\]', {'f-factor'}, 'the F-factor'),
    (r'\bconfidence level\b', {'level'}, 'the confidence level'),
    (r'\bMurphree\b', {'murphree'}, 'the Murphree efficiency'),
    (r'\bone JSON document\b', {'json'}, 'JSON output'),
    (r'\bno warnings\b', {'quiet'}, 'quiet'),
    (r'\bseed\b', {'seed'}, 'the random seed'),
    (r'^packed height\b', {'packed-height'}, 'the packed height'),
    (r'^chart height\b', {'chart-height'}, 'the chart height'),
    (r'^chart width\b', {'chart-width'}, 'the chart width'),
    (r'\bfolder of model files\b', {'fits'}, 'the fits folder'),
    (r'\bfewest rows\b', {'min-rows'}, 'the shortest run'),
    (r'\brobust reweighting\b', {'robust'}, 'robust reweighting'),
    (r'\bbootstrap resamples\b', {'bootstrap'}, 'bootstrap resamples'),
    (r'^distillate mole fraction\b', {'xd'}, 'xD'),
    (r'^pot mole fraction\b', {'xb'}, 'xB'),
    (r'\bdynamic batch model\b', {'dynamics'}, 'the batch model (quasi-steady or with holdup)'),
]
for c, rows in table.items():
    for name, (short, h) in rows.items():
        for rx, spellings, what in concepts:
            if re.search(rx, h) and name not in spellings:
                bad.append(f'{c}: --{name} sets {what}, which is spelled --{"/--".join(sorted(spellings))} elsewhere')
# 2. options from one table entry read the same everywhere
shared = ['json', 'quiet', 'level', 'murphree', 'seed', 'fits', 'min-rows', 'xd', 'xb',
          'alpha', 'kvalue', 'bootstrap', 'robust', 'stages']
for name in shared:
    helps = {c: rows[name][1] for c, rows in table.items() if name in rows}
    if len(set(helps.values())) > 1:
        bad.append(f'--{name} has {len(set(helps.values()))} help texts: {helps}')
# 3. old spellings are not offered
for c, rows in table.items():
    for old in ('fload', 'out', 'reference-load', 'reference-reflux', 'report', 'height', 'width',
                'chart'):
        if old in rows:
            bad.append(f'{c}: offers the old spelling --{old}')
# 4. one output file: -o/--output
for c in ('invert', 'predict', 'plot', 'report'):
    if table.get(c, {}).get('output', (None,))[0] != 'o':
        bad.append(f'{c}: no -o/--output')
# 4b. a file written besides the command's main output ("also write ...", "also draw ...")
#     is --<what>-out FILE everywhere (calibrate --report-out once sat beside probe --chart)
for c, rows in table.items():
    for name, (short, h) in rows.items():
        if re.match(r'also (write|draw)\b', h) and not name.endswith('-out'):
            bad.append(f'{c}: --{name} writes an extra file but is not spelled --<what>-out')
# 5. one meaning per spelling: every option spelled as a quantity above names that
#    quantity in its help (--height once meant the packed height in hetp and the chart
#    height in plot)
for c, rows in table.items():
    for name, (short, h) in rows.items():
        for rx, spellings, what in concepts:
            if name in spellings and not re.search(rx, h):
                bad.append(f'{c}: --{name} does not set {what} ({h!r})')
for b in bad:
    print('FAIL:', b)
print(f'{sum(len(r) for r in table.values())} options of {len(table)} commands checked')
sys.exit(1 if bad else 0)
PY
then echo "ok: one spelling per meaning across $(echo $cmds | wc -w) commands"; else fails=$((fails + 1)); fi

# The old spellings still work, with one warning naming the new one.
M="$ROOT/tests/badinput/model_good.json"
expect_exit 0 "option '--fload' is deprecated; use '--f-factor'" --many \
    "$BIN" hetp "$M" --reflux 3 --fload 1.3 --packed-height 2
grep -q "HETP" "$tmp/out" || { echo "FAIL: hetp --fload gave no HETP"; fails=$((fails + 1)); }
expect_exit 0 "option '--chart' is deprecated; use '--chart-out'" --many \
    "$BIN" probe "$M" --at 2,2.5 --chart "$tmp/probe.svg"
grep -q "<svg" "$tmp/probe.svg" || { echo "FAIL: probe --chart drew nothing"; fails=$((fails + 1)); }
expect_exit 0 "option '--out' is deprecated; use '--output'" --many \
    "$BIN" invert --column "$ROOT/datasets/columns/demo_alpha.json" --out "$tmp/rows.csv" "$ROOT/tests/badinput/good.csv"
[ -s "$tmp/rows.csv" ] || { echo "FAIL: invert --out wrote nothing"; fails=$((fails + 1)); }
# --height meant two things (packed height in hetp, chart height in plot): each has its own
# spelling now, and the old one still works with a warning
expect_exit 0 "option '--height' is deprecated; use '--packed-height'" --many \
    "$BIN" hetp "$M" --reflux 3 --height 2
grep -q "over 2.000 m packed" "$tmp/out" || { echo "FAIL: hetp --height did not set the packed height"; fails=$((fails + 1)); }
expect_exit 0 "option '--height' is deprecated; use '--chart-height'" --many \
    "$BIN" plot mccabe --alpha 2.5 --xd 0.95 --reflux 3 --stages 5 -o "$tmp/c.svg" --height 300
grep -q 'height="300' "$tmp/c.svg" || { echo "FAIL: plot --height did not set the chart height"; fails=$((fails + 1)); }
# --quiet anywhere on the line silences the warning
expect_exit 0 "" -- "$BIN" hetp "$M" --fload 1.3 --reflux 3 --packed-height 2 --quiet
[ ! -s "$tmp/err" ] || { echo "FAIL: --quiet left a warning"; cat "$tmp/err"; fails=$((fails + 1)); }
# A value outside its domain is refused by the table entry, naming the option
expect_exit 2 "option '--f-factor': -1 is negative" -- "$BIN" hetp "$M" --reflux 3 --f-factor -1
expect_exit 2 "option '--level': 1.5 is outside (0, 1)" -- "$BIN" trend K7 --reflux 3 --level 1.5
expect_exit 2 "option '--murphree': 0 is outside (0, 1]" -- "$BIN" steps --alpha 2 --xd 0.9 --reflux 3 --stages 4 --murphree 0

# The commands whose numbers feed a decision end their text output with the caution
# (printed once, by main, from the command table's flag); --json carries it as a member.
expect_exit 0 "" -- "$BIN" hetp "$M" --reflux 3 --packed-height 2
[ "$(grep -c '^Caution: ' "$tmp/out")" -eq 1 ] || { echo "FAIL: hetp text lacks one caution"; fails=$((fails + 1)); }
expect_exit 0 "" -- "$BIN" predict --model "$M" --column "$ROOT/datasets/columns/demo_benzene_toluene.json" \
    --charge 25 --xb0 0.5 --boilup 3.6 --reflux 3 --cut pot-x=0.15 --samples 0 --quiet
[ "$(grep -c '^Caution: ' "$tmp/out")" -eq 1 ] || { echo "FAIL: predict text lacks one caution"; fails=$((fails + 1)); }
expect_exit 0 "" -- "$BIN" invert --alpha 2.5 --xd 0.95 --xb 0.05 --reflux inf
[ "$(grep -c '^Caution: ' "$tmp/out")" -eq 1 ] || { echo "FAIL: invert text lacks one caution"; fails=$((fails + 1)); }
expect_exit 0 "" -- "$BIN" report "$M" -o "$tmp/report.html" --quiet
[ "$(grep -c '^Caution: ' "$tmp/out")" -eq 1 ] || { echo "FAIL: report text lacks one caution"; fails=$((fails + 1)); }
expect_exit 0 "" -- "$BIN" steps --alpha 2.5 --xd 0.95 --reflux 4 --stages 7
[ "$(grep -c '^Caution: ' "$tmp/out")" -eq 1 ] || { echo "FAIL: steps text lacks one caution"; fails=$((fails + 1)); }
expect_exit 0 "" -- "$BIN" plot mccabe --alpha 2.5 --xd 0.95 --reflux 3 --stages 6 -o "$tmp/caution.svg" --quiet
[ "$(grep -c '^Caution: ' "$tmp/out")" -eq 1 ] || { echo "FAIL: plot mccabe text lacks one caution"; fails=$((fails + 1)); }
expect_exit 0 "" -- "$BIN" steps --alpha 2.5 --xd 0.95 --reflux 4 --stages 7 --json
"$PY" -c "import json,sys; d=json.load(open('$tmp/out')); sys.exit(0 if d['caution'].startswith('Caution:') else 1)" ||
    { echo "FAIL: steps --json: not one JSON document with its caution"; fails=$((fails + 1)); }
expect_exit 0 "" -- "$BIN" hetp "$M" --reflux 3 --packed-height 2 --json
"$PY" -c "import json,sys; d=json.load(open('$tmp/out')); sys.exit(0 if d['caution'].startswith('Caution:') else 1)" ||
    { echo "FAIL: hetp --json: not one JSON document with its caution"; fails=$((fails + 1)); }
# invert's per-row CSV on stdout is data: no caution after it
expect_exit 0 "" -- "$BIN" invert --column "$ROOT/datasets/columns/demo_alpha.json" --quiet "$ROOT/tests/badinput/good.csv"
! grep -q "Caution" "$tmp/out" || { echo "FAIL: caution inside the CSV on stdout"; fails=$((fails + 1)); }
finish
