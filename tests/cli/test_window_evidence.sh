# One window, one stage count: the first quasi-steady window's stage count and standard
# error are identical in `invert --json` (run-log mode), `calibrate --points-out` and the
# HTML report of the same calibration, on the invented demo data. Before the evidence
# module, invert gave 8.713 ± 0.215 for the first window of 2025-01.csv (a mean of
# per-sample counts) and --points-out 8.594 ± 0.143 (the evidence); see
# docs/calibration.md §3 for which definition is right and why.
BIN=$1
ROOT=$2
. "$(dirname "$0")/lib.sh"
PY=/usr/bin/python3
COL="$ROOT/datasets/columns/demo_benzene_toluene.json"
LOGS="$ROOT/datasets/demo/logs/2025-01.csv $ROOT/datasets/demo/logs/2025-02.csv"

"$BIN" invert --column "$COL" --json --quiet $LOGS >"$tmp/inv.json" || {
    echo "FAIL: invert --json"; fails=$((fails + 1)); }
"$BIN" calibrate --column "$COL" --fits "$tmp/fits" --quiet --points-out "$tmp/pts.csv" \
    --report "$tmp/rep.html" $LOGS >/dev/null || { echo "FAIL: calibrate"; fails=$((fails + 1)); }

# The first window with a stage count in each output (points and report list only those).
# invert's JSON and the points file print 17 significant digits: equal exactly; the report
# prints 4 decimals: equal to the others rounded there.
if "$PY" - "$tmp" <<'PYEOF'
import csv, json, re, sys
d = sys.argv[1]
inv = [w for w in json.load(open(d + "/inv.json"))["windows"] if w["stages"] is not None]
row = next(csv.DictReader(open(d + "/pts.csv")))
html = open(d + "/rep.html").read()
sec = html[html.index('<section id="windows">'):]
sec = sec[sec.index("<tbody>"): sec.index("</tbody>")]
# the report's windows table: the last cell of a row is "stages ± std. error" (4 decimals),
# or words for a window without a stage count
cells = next(m.groups() for m in (re.search(r"<td>([0-9.]+) \u00b1 ([0-9.]+)</td></tr>", r)
                                  for r in sec.split("<tr>")) if m)
s_inv, u_inv = inv[0]["stages"], inv[0]["se_stages"]
s_pts, u_pts = float(row["stages"]), float(row["sigma"])
s_rep, u_rep = float(cells[0]), float(cells[1])
print("first window: invert %.6f ± %.6f, points %.6f ± %.6f, report %.4f ± %.4f"
      % (s_inv, u_inv, s_pts, u_pts, s_rep, u_rep))
ok = s_inv == s_pts and u_inv == u_pts
ok = ok and "%.4f" % s_inv == cells[0] and "%.4f" % u_inv == cells[1]
ok = ok and len(inv) == sum(1 for _ in csv.DictReader(open(d + "/pts.csv")))
sys.exit(0 if ok else 1)
PYEOF
then
    echo "ok: first window's stage count identical in invert --json, --points-out and the report"
else
    echo "FAIL: the window's stage count differs between outputs"; fails=$((fails + 1))
fi
finish
