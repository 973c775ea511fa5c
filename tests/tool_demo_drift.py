#!/usr/bin/env python3
"""tool_demo_drift.py — drifts planted in the clean demo runs: which analyser does `check`
name? (docs/methods.md, "Analyser drift and balance checks", the demo figures.)

  usage: tool_demo_drift.py STAGECAL [REPO]

For every run of datasets/demo/logs (invented data) that `check --column` flags for no
drift, each run in turn with the other runs of its month file unchanged: the analyser's
reading gets rate x (t - t0) added from the run's first row t0 (pot analyser xB +-0.006 /h,
20 u(xB) over ten hours; distillate analyser xD -+0.004 /h, 20 u(xD)), readings clipped to
[0, 1] as an analyser's; the month file so changed is checked with the demo column
(`check --column ... --json`) and the run's drift_analyser read. Printed per planted drift:
how many runs were named correctly, put down to the other analyser, unattributed or not
flagged; on stderr each run not named correctly. Not run by ctest (346 checks: about 15 s
of one core).
"""
import csv
import io
import json
import os
import subprocess
import sys
import tempfile
from datetime import datetime

POT, DIST = "pot analyser (xB)", "distillate analyser (xD)"  # check's drift_analyser
PLANTS = [("xB[mol/mol]", +0.006, POT), ("xB[mol/mol]", -0.006, POT),
          ("xD[mol/mol]", -0.004, DIST), ("xD[mol/mol]", +0.004, DIST)]


def check(stagecal, column, path):
    out = subprocess.run([stagecal, "check", "--json", "--column", column, path],
                         capture_output=True, text=True, check=False)
    if out.returncode != 0:  # findings are not failures (exit 0)
        sys.exit(f"check {path}: exit {out.returncode}: {out.stderr}")
    return {r["name"]: r["drift_analyser"] for r in json.loads(out.stdout)["runs"]}


def planted(rows, header, run, col, rate):
    """The month file's text with the drift planted in run's rows of column col."""
    it, ic, irun = header.index("time[iso8601]"), header.index(col), header.index("run")
    t0 = None
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(header)
    for row in rows:
        row = list(row)
        if row[irun] == run:
            t = datetime.fromisoformat(row[it].replace("Z", "+00:00"))
            t0 = t0 or t
            try:
                x = float(row[ic])
            except ValueError:
                x = float("nan")
            if x == x and abs(x) != float("inf"):
                x += rate * (t - t0).total_seconds() / 3600.0
                row[ic] = "%.6f" % min(1.0, max(0.0, x))
        w.writerow(row)
    return buf.getvalue()


def main():
    if len(sys.argv) < 2:
        sys.exit(__doc__)
    stagecal = os.path.abspath(sys.argv[1])
    repo = sys.argv[2] if len(sys.argv) > 2 else os.path.join(os.path.dirname(__file__), "..")
    column = os.path.join(repo, "datasets/columns/demo_benzene_toluene.json")
    logs = os.path.join(repo, "datasets/demo/logs")
    tally = {p: {} for p in PLANTS}
    clean = flagged = 0
    with tempfile.TemporaryDirectory() as tmp:
        for name in sorted(os.listdir(logs)):
            path = os.path.join(logs, name)
            with open(path, newline="") as f:
                rows = list(csv.reader(f))
            header, rows = rows[0], rows[1:]
            base = check(stagecal, column, path)
            for run, named in base.items():
                if named != "none":
                    flagged += 1
                    print(f"{name} {run}: flagged as it is ({named}), left out", file=sys.stderr)
                    continue
                clean += 1
                for p in PLANTS:
                    col, rate, _ = p
                    tmpf = os.path.join(tmp, name)
                    with open(tmpf, "w") as f:
                        f.write(planted(rows, header, run, col, rate))
                    got = check(stagecal, column, tmpf)[run]
                    tally[p][got] = tally[p].get(got, 0) + 1
                    if got != p[2]:
                        print(f"{name} {run}: {col[:2]} {rate:+.3f} /h named {got}",
                              file=sys.stderr)
    print(f"clean runs: {clean} (runs flagged as they are: {flagged})")
    for p in PLANTS:
        col, rate, want = p
        t = tally[p]
        other = POT if want == DIST else DIST
        rest = sum(n for k, n in t.items() if k not in (want, other, "none"))
        print(f"{col[:2]} {rate:+.3f} /h: named correctly {t.get(want, 0)} of {clean}, "
              f"put down to the other analyser {t.get(other, 0)}, unattributed {rest}, "
              f"not flagged {t.get('none', 0)}")


if __name__ == "__main__":
    main()
