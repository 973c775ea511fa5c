#!/bin/sh
# report_render.sh — renders the full demo report in headless Chromium and checks that
# the page is not blank and that every plot in it was drawn.
#
# usage: sh report_render.sh <stagecal-binary> <repo-root>
#
# The demo report is the report of a calibration of the invented demo data
# (stagecal calibrate, then stagecal report). Checks:
#   1. Chromium lays the page out: an instrumented copy (a script is injected into the
#      copy only; the report itself has none) reports, through the document title seen
#      by --dump-dom, each inline SVG figure's box, its drawn-content bounding box
#      (getBBox) and its number of drawn elements; every figure must have a non-zero box
#      and content, and the count must equal the <figure> elements in the HTML source.
#   2. A screenshot of the unmodified report, as tall as the page, is not blank, and
#      each figure's region in it holds non-white pixels (≥ 2 % of its area: axes, text
#      and curves of our charts cover far more; a missing image leaves 0).
#      Each figure's labels are SVG text: at least 3 <text> elements (title, axis labels).
#   3. Printed to A4 (--print-to-pdf, the report's own @page rules): page one (the answer,
#      the caution and the sign-off; everything after it hidden) fits on one sheet, and
#      the caution is never alone on a page: hiding it leaves the page count unchanged.
#      Negative control: a copy that pushes the caution onto a page of its own must add
#      a page, or the check is blind.
# Exit 77 (ctest SKIP_RETURN_CODE) when chromium or Python's PIL is not installed.
set -u
bin=$1
root=$2
py=/usr/bin/python3

chromium_bin=$(command -v chromium || command -v chromium-browser || true)
if [ -z "$chromium_bin" ]; then
    echo "SKIP: chromium is not installed (apt-get install -y chromium)"
    exit 77
fi
if ! "$py" -c 'import PIL' 2>/dev/null; then
    echo "SKIP: python3-pil is not installed"
    exit 77
fi

work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
html=$work/demo_report.html
# The demo calibration's report as the README's quick start writes it (invented demo data,
# datasets/demo: one quarter of logs, calibrate --report-out).
demo=$root/datasets/demo/logs
"$bin" calibrate --column "$root/datasets/columns/demo_benzene_toluene.json" \
    --fits "$work/fits" --report-out "$html" --quiet --json \
    "$demo/2025-01.csv" "$demo/2025-02.csv" "$demo/2025-03.csv" >"$work/cal.json" ||
    { echo "FAIL: calibrate on the demo data"; exit 1; }
model=$("$py" -c "import json,sys; print(json.load(open(sys.argv[1]))['model_file'])" "$work/cal.json")

chrome() {
    profile=$(mktemp -d "$work/profile.XXXXXX")
    "$chromium_bin" --headless --no-sandbox --disable-gpu --no-first-run \
        --disable-background-networking --disable-component-update --disable-sync \
        --user-data-dir="$profile" "$@" 2>"$work/chromium.err"
}

# 1. instrumented copy: the title becomes "H=<page height>;<x,y,w,h,bw,bh,n>|…"
sed 's#</body>#<script>(function(){var out=[];document.querySelectorAll("svg.stagecal-figure").forEach(function(s){var r=s.getBoundingClientRect(),b={width:0,height:0};try{b=s.getBBox();}catch(e){}out.push([Math.round(r.left+window.scrollX),Math.round(r.top+window.scrollY),Math.round(r.width),Math.round(r.height),Math.round(b.width),Math.round(b.height),s.querySelectorAll("path,use,rect,polyline,line").length,s.querySelectorAll("text").length].join(","));});document.title="H="+Math.ceil(document.documentElement.scrollHeight)+";"+out.join("|");})();</script></body>#' \
    "$html" >"$work/probe.html"
chrome --window-size=1200,1600 --dump-dom "file://$work/probe.html" >"$work/dom.html"
figures=$(grep -c '<figure' "$html")
title=$(sed -n 's#.*<title>\(H=[^<]*\)</title>.*#\1#p' "$work/dom.html" | head -n 1)
if [ -z "$title" ]; then
    echo "FAIL: chromium did not lay out the page (no probe result)"
    cat "$work/chromium.err"
    exit 1
fi
height=$(echo "$title" | sed 's/^H=\([0-9]*\);.*/\1/')
[ "$height" -gt 16000 ] && height=16000

# 2. screenshot of the unmodified report, the whole page tall
chrome --window-size=1200,"$height" --hide-scrollbars --screenshot="$work/page.png" \
    "file://$html" >/dev/null
if [ ! -s "$work/page.png" ]; then
    echo "FAIL: chromium wrote no screenshot"
    cat "$work/chromium.err"
    exit 1
fi

# 3. A4 print: pages of the report, of page one alone, without the caution, and of the
# negative control (the caution on a sheet of its own)
pages() { # html → number of A4 pages Chromium prints
    chrome --no-pdf-header-footer --print-to-pdf="$work/p.pdf" "file://$1" >/dev/null
    "$py" -c 'import re,sys; print(len(re.findall(rb"/Type\s*/Page[^s]", open(sys.argv[1],"rb").read())))' "$work/p.pdf"
}
sed 's#</head>#<style>\#caution{display:none!important}</style></head>#' "$html" >"$work/nocaution.html"
sed 's#</head>#<style>\#caution{break-before:page!important;break-after:page!important}</style></head>#' "$html" >"$work/control.html"
sed 's#</head>#<style>.page-one~*{display:none!important}</style></head>#' "$html" >"$work/one.html"
n_all=$(pages "$html")
n_one=$(pages "$work/one.html")
n_noc=$(pages "$work/nocaution.html")
n_ctl=$(pages "$work/control.html")
echo "A4 pages: report $n_all, page one alone $n_one, without the caution $n_noc, caution forced alone $n_ctl"
print_ok=1
[ "$n_all" -ge 2 ] || { echo "FAIL: the report printed $n_all page(s)"; print_ok=0; }
[ "$n_one" -eq 1 ] || { echo "FAIL: page one (answer, caution, sign-off) takes $n_one sheets"; print_ok=0; }
[ "$n_noc" -eq "$n_all" ] || { echo "FAIL: the caution has a page of its own ($n_all pages with it, $n_noc without)"; print_ok=0; }
[ "$n_ctl" -gt "$n_noc" ] || { echo "FAIL: negative control: a caution forced onto its own page was not detected"; print_ok=0; }

"$py" - "$work/page.png" "$title" "$figures" "$print_ok" <<'EOF'
import sys
from PIL import Image
png, title, want, print_ok = sys.argv[1], sys.argv[2], int(sys.argv[3]), sys.argv[4] == "1"
im = Image.open(png).convert("RGB")
W, H = im.size
px = im.load()
ok = print_ok
# page not blank: well over 1 % of the pixels carry ink, and many colours
hist = im.getcolors(maxcolors=1 << 24)
white = sum(c for c, rgb in hist if rgb == (255, 255, 255))
ink = W * H - white
print(f"page {W}x{H}: {ink} non-white pixels, {len(hist)} colours")
if ink < 0.01 * W * H or len(hist) < 16:
    print("FAIL: the page is blank or nearly so"); ok = False
figs = [f for f in title.split(";", 1)[1].split("|") if f]
if len(figs) != want:
    print(f"FAIL: {len(figs)} inline SVG figures laid out, {want} <figure> elements in the HTML"); ok = False
for k, f in enumerate(figs, 1):
    x, y, w, h, bw, bh, n, nt = map(int, f.split(","))
    if nt < 3:  # axis labels and title as SVG text, not outlines
        print(f"FAIL: figure {k}: {nt} <text> elements (its labels are not text)"); ok = False
    if w <= 0 or h <= 0 or bw <= 0 or bh <= 0 or n == 0:
        print(f"FAIL: figure {k}: box {w}x{h}, content {bw}x{bh}, {n} elements"); ok = False; continue
    x0, y0, x1, y1 = max(x, 0), max(y, 0), min(x + w, W), min(y + h, H)
    if x1 <= x0 or y1 <= y0:
        print(f"FAIL: figure {k} lies outside the screenshot ({x},{y} {w}x{h})"); ok = False; continue
    region = im.crop((x0, y0, x1, y1))
    cols = region.getcolors(maxcolors=1 << 24)
    nonwhite = (x1 - x0) * (y1 - y0) - sum(c for c, rgb in cols if rgb == (255, 255, 255))
    frac = nonwhite / float((x1 - x0) * (y1 - y0))
    print(f"figure {k}: {w}x{h} at ({x},{y}), {n} elements, {nt} <text>, {100 * frac:.1f} % ink")
    if frac < 0.02:
        print(f"FAIL: figure {k} is blank in the screenshot"); ok = False
sys.exit(0 if ok else 1)
EOF
