#!/bin/sh
# planner_link.sh BUILD_DIR SOURCE_DIR — a batch planner links the core library only.
#
# Installs the build into a temporary prefix, compiles the worked example of
# docs/planner-api.md (tests/tool_planner_example.c) with nothing but
# `pkg-config --cflags --libs stagecal` from that tree, runs it on a model file and checks:
#  * it links libstagecal.so from the temporary prefix, and ldd shows no PLplot (the
#    charts library, installed beside it, does show PLplot: the same check on it is the
#    control that a PLplot dependency would be seen);
#  * it loads tests/planner_model.json (a constant-form model, a = 8.5885620061619719,
#    covariance 0.016310589319129605, sigma 0.45314458697263382, dof 4, level 0.95) and
#    prints stages a, the 95 % confidence band a ± t·sqrt(cov) and the prediction band
#    a ± t·sqrt(cov + sigma²), with t the Student quantile t(0.975, 4) taken from
#    scipy.stats.t.ppf (2.776 in published tables). Tolerance 6e-4: the program prints
#    three decimals.
set -eu
build=$1
src=$2
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT INT TERM
fail() {
    echo "planner_link: $*" >&2
    exit 1
}

cmake --install "$build" --prefix "$tmp/prefix" >"$tmp/install.log" 2>&1 ||
    fail "cmake --install failed: $(tail -3 "$tmp/install.log")"
pc=$(find "$tmp/prefix" -name stagecal.pc | head -1)
[ -n "$pc" ] || fail "no stagecal.pc installed"
pcdir=$(dirname "$pc")
libdir=$(dirname "$pcdir")
# the .pc files carry the configured prefix; point them at the temporary tree
pkg() { PKG_CONFIG_PATH=$pcdir pkg-config --define-variable=prefix="$tmp/prefix" "$@"; }
pkg --print-requires-private stagecal | grep -qi nlopt && fail "stagecal.pc still asks for NLopt"
pkg --print-requires-private stagecal | grep -qi plplot && fail "stagecal.pc asks for PLplot"

# shellcheck disable=SC2046
cc -std=c11 $(pkg --cflags stagecal) -o "$tmp/planner" "$src/tests/tool_planner_example.c" \
    $(pkg --libs stagecal) 2>"$tmp/cc.log" || fail "compile/link failed: $(cat "$tmp/cc.log")"

LD_LIBRARY_PATH=$libdir ldd "$tmp/planner" >"$tmp/ldd.txt" || fail "ldd failed"
grep -q "libstagecal\.so.*$tmp/prefix" "$tmp/ldd.txt" ||
    fail "the planner does not load libstagecal.so from the installed tree: $(cat "$tmp/ldd.txt")"
grep -qi plplot "$tmp/ldd.txt" && fail "the planner pulls in PLplot: $(grep -i plplot "$tmp/ldd.txt")"
grep -q nlopt "$tmp/ldd.txt" && fail "the planner pulls in NLopt"
charts=$(find "$libdir" -name 'libstagecal-charts.so*' -type f | head -1)
[ -n "$charts" ] || fail "libstagecal-charts.so not installed"
LD_LIBRARY_PATH=$libdir ldd "$charts" | grep -qi plplot ||
    fail "control failed: ldd does not show PLplot in the charts library"

LD_LIBRARY_PATH=$libdir "$tmp/planner" "$src/tests/planner_model.json" >"$tmp/out.txt" \
    2>"$tmp/err.txt" || fail "the planner failed: $(cat "$tmp/err.txt")"
/usr/bin/python3 - "$tmp/out.txt" <<'PY' || fail "wrong numbers: $(cat "$tmp/out.txt")"
import math, re, sys
from scipy.stats import t as student
a, cov, sigma, dof = 8.5885620061619719, 0.016310589319129605, 0.45314458697263382, 4
q = student.ppf(0.975, dof)
want = [a, a - 1, a - q * math.sqrt(cov), a + q * math.sqrt(cov),
        a - q * math.sqrt(cov + sigma**2), a + q * math.sqrt(cov + sigma**2)]
rows = [l for l in open(sys.argv[1]) if re.match(r"\s+(0\.5|1|2|4|8|inf)\s", l)]
assert len(rows) == 6, rows
for line in rows:
    got = [float(v) for v in re.findall(r"-?\d+\.\d+", line)[-6:]]
    assert all(abs(g - w) <= 6e-4 for g, w in zip(got, want)), (line, want)
PY
echo "planner_link: ok ($(grep -c . "$tmp/ldd.txt") libraries, no PLplot)"
