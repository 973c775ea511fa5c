#!/bin/sh
# chart_render.sh — every chart of stagecal rendered in headless Chromium, with two
# checks a reviewer's eye would make:
#   (a) the legend covers no plotted data (a pixel test), stays inside the drawing and
#       leaves the plot at least half its width;
#   (b) the SVG text is text (labels are <text> elements Chromium reads as text; negative
#       control: the known case with its labels turned into outlines must be caught).
#
# usage: sh chart_render.sh <stagecal-binary> <repo-root> <tool_chart_pages-binary>
#
# tool_chart_pages writes the charts (the report's run chart, fit, residual and
# McCabe-Thiele charts of the invented demo calibration, the run chart of one run, a trend
# and a batch chart, the self-starting chart of `history`, the McCabe-Thiele chart at 30
# stages with its zoomed inset, the chart of `probe`, and a known case whose markers fill
# three quarters of the plot box)
# into two pages that differ only in the legend: on.html draws it, off.html does not.
# Where the renderer put the legend inside a plot box, Chromium's screenshots of the two
# pages differ only there: those pixels are the legend's box, and in the legend-free
# screenshot that box must hold no pixel of a plotted colour (saturated colours: markers,
# lines, bars; the grey grid, black axes and text and the pale band tints do not count).
# Where it put the legend outside (no free corner; stacked panels), the plot box shrinks
# to make room, so the two pages differ everywhere: then the legend's box must not meet
# any plot box (the boxes as the renderer reports them, stagecal_plot_layout).
# Negative control: a copy of off.html with the known case's legend (its pixels, cut
# from the first screenshot) laid over the known case's filled top-left quarter must be
# caught by the same check; otherwise the check is blind and the test fails.
# Exit 77 (ctest SKIP_RETURN_CODE) when chromium or Python's PIL is not installed.
set -u
bin=$1
root=$2
tool=$3
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
[ -x "$bin" ] || { echo "FAIL: no stagecal binary at $bin"; exit 1; }

work=$(mktemp -d)
if [ -n "${KEEP_WORK:-}" ]; then echo "work files kept in $work"; else trap 'rm -rf "$work"' EXIT; fi
demo=$root/datasets/demo/logs
"$tool" "$root/datasets/columns/demo_benzene_toluene.json" "$work" \
    "$demo/2025-01.csv" "$demo/2025-02.csv" "$demo/2025-03.csv" ||
    { echo "FAIL: tool_chart_pages"; exit 1; }

chrome() {
    profile=$(mktemp -d "$work/profile.XXXXXX")
    "$chromium_bin" --headless --no-sandbox --disable-gpu --no-first-run \
        --disable-background-networking --disable-component-update --disable-sync \
        --user-data-dir="$profile" "$@" 2>>"$work/chromium.err"
}

# figure boxes and page height, through an instrumented copy (title = "H=…;x,y,w,h|…")
probe='<script>(function(){var out=[];document.querySelectorAll("svg.stagecal-figure").forEach(function(s){var r=s.getBoundingClientRect();out.push([Math.round(r.left+window.scrollX),Math.round(r.top+window.scrollY),Math.round(r.width),Math.round(r.height)].join(","));});document.title="H="+Math.ceil(document.documentElement.scrollHeight)+";"+out.join("|");})();</script></body>'
sed "s#</body>#$probe#" "$work/on.html" >"$work/probe.html"
chrome --window-size=1200,1600 --dump-dom "file://$work/probe.html" >"$work/probe_dom.html"
title=$(sed -n 's#.*<title>\(H=[^<]*\)</title>.*#\1#p' "$work/probe_dom.html" | head -n 1)
if [ -z "$title" ]; then
    echo "FAIL: chromium did not lay out the chart page"
    cat "$work/chromium.err"
    exit 1
fi
height=$(echo "$title" | sed 's/^H=\([0-9]*\);.*/\1/')
[ "$height" -gt 16000 ] && height=16000
# the two screenshots (the probe's dump is the page as Chromium parsed it: the text check)
for p in on off; do
    chrome --window-size=1200,"$height" --hide-scrollbars --screenshot="$work/$p.png" \
        "file://$work/$p.html" >/dev/null
    [ -s "$work/$p.png" ] || { echo "FAIL: no screenshot of $p.html"; cat "$work/chromium.err"; exit 1; }
done

# the negative control page: the known case's legend laid over its data
"$py" - "$work" "$title" <<'EOF' || exit 1
import base64, io, sys
from PIL import Image, ImageChops
work, title = sys.argv[1], sys.argv[2]
names = [l.split()[0] for l in open(f"{work}/names.txt") if l.strip()]
boxes = [tuple(map(int, f.split(","))) for f in title.split(";", 1)[1].split("|") if f]
k = names.index("known")
x, y, w, h = boxes[k]
on = Image.open(f"{work}/on.png").convert("RGB")
off = Image.open(f"{work}/off.png").convert("RGB")
bb = ImageChops.difference(on.crop((x, y, x + w, y + h)), off.crop((x, y, x + w, y + h))).getbbox()
if not bb:
    print("FAIL: the known case drew no legend"); sys.exit(1)
patch = on.crop((x + bb[0], y + bb[1], x + bb[2], y + bb[3]))
buf = io.BytesIO(); patch.save(buf, "PNG")
src = base64.b64encode(buf.getvalue()).decode()
# over the filled top-left quarter of the plot box
px, py_ = x + int(0.17 * w), y + int(0.22 * h)
img = (f'<img alt="" src="data:image/png;base64,{src}" style="position:absolute;left:{px}px;'
       f'top:{py_}px;width:{patch.width}px;height:{patch.height}px">')
html = open(f"{work}/off.html").read().replace("</body>", img + "</body>")
open(f"{work}/control.html", "w").write(html)
EOF
chrome --window-size=1200,"$height" --hide-scrollbars --screenshot="$work/control.png" \
    "file://$work/control.html" >/dev/null
[ -s "$work/control.png" ] || { echo "FAIL: no screenshot of the control page"; exit 1; }

"$py" - "$work" "$title" <<'EOF'
import re, sys
from PIL import Image, ImageChops
work, title = sys.argv[1], sys.argv[2]
lines = [l.split() for l in open(f"{work}/names.txt") if l.strip()]
names = [l[0] for l in lines]
inside = {l[0]: l[1] == "1" for l in lines}
geom = {}
for l in lines:
    v = list(map(float, l[2:6]))
    nb = int(l[6])
    geom[l[0]] = (v, [list(map(float, l[7 + 4 * i: 11 + 4 * i])) for i in range(nb)])
boxes = [tuple(map(int, f.split(","))) for f in title.split(";", 1)[1].split("|") if f]
on = Image.open(f"{work}/on.png").convert("RGB")
off = Image.open(f"{work}/off.png").convert("RGB")
ctl = Image.open(f"{work}/control.png").convert("RGB")
ok = True
if len(boxes) != len(names):
    print(f"FAIL: {len(boxes)} figures laid out, {len(names)} charts written"); sys.exit(1)

# A plotted colour: a saturated pixel (max - min of R, G, B >= 60). The palette's colours
# (Okabe-Ito: blue 0,114,178; vermillion 213,94,0; ...) have 150-230; greys, black, white
# have 0 and the pale band tints under 60 (common practice, no source: a threshold
# between the two groups as measured on these charts).
def data_pixels(img, box):
    n = 0
    for r, g, b in img.crop(box).getdata():
        if max(r, g, b) - min(r, g, b) >= 60:
            n += 1
    return n

# At most 6 such pixels in the legend's box: the anti-aliased fringe of a line passing
# one pixel outside it (measured 0 on every chart here); one marker is about 80.
LIMIT = 6
def legend_check(label, img_legend, k):
    x, y, w, h = boxes[k]
    bb = ImageChops.difference(img_legend.crop((x, y, x + w, y + h)),
                               off.crop((x, y, x + w, y + h))).getbbox()
    if not bb:
        return None, None
    # the box shrunk by 2 px: its own border's anti-aliasing is not data
    box = (x + bb[0] + 2, y + bb[1] + 2, x + bb[2] - 2, y + bb[3] - 2)
    return box, data_pixels(off, box)

for k, name in enumerate(names):
    # the legend lies inside the drawing (a legend cut at the page edge loses its labels),
    # and a legend outside leaves the plot at least half the drawing's width
    (lx0, lx1, ly0, ly1), pboxes = geom[name]
    if lx0 < -0.003 or lx1 > 1.003 or ly0 < -0.003 or ly1 > 1.003:
        print(f"FAIL: chart '{name}': the legend leaves the drawing (x {lx0:.3f}-{lx1:.3f}, "
              f"y {ly0:.3f}-{ly1:.3f})"); ok = False
    if pboxes and pboxes[0][1] - pboxes[0][0] < 0.5:
        print(f"FAIL: chart '{name}': the plot is {pboxes[0][1] - pboxes[0][0]:.3f} of the "
              f"drawing's width beside its legend"); ok = False
    if not inside[name]:
        (lx0, lx1, ly0, ly1), pboxes = geom[name]
        hit = [i for i, (x0, x1, y0, y1) in enumerate(pboxes)
               if min(lx1, x1) - max(lx0, x0) > 0.002 and min(ly1, y1) - max(ly0, y0) > 0.002]
        print(f"chart '{name}': legend outside the {len(pboxes)} plot box(es), at "
              f"x {lx0:.3f}-{lx1:.3f}, y {ly0:.3f}-{ly1:.3f} of the drawing; meets plot box(es): {hit or 'none'}")
        if hit or lx1 <= lx0 or ly1 <= ly0:
            print(f"FAIL: chart '{name}': the legend meets a plot box"); ok = False
        continue
    box, n = legend_check(name, on, k)
    if box is None:
        print(f"FAIL: chart '{name}': no legend drawn"); ok = False; continue
    print(f"chart '{name}': legend box {box[2]-box[0]}x{box[3]-box[1]} px at "
          f"({box[0]},{box[1]}); plotted-colour pixels under it: {n}")
    if n > LIMIT:
        print(f"FAIL: chart '{name}': the legend covers plotted data ({n} pixels > {LIMIT})")
        ok = False

# the negative control must be caught
k = names.index("known")
box, n = legend_check("control", ctl, k)
print(f"negative control (legend laid over the known case's data): {n} plotted-colour pixels under it")
if box is None or n <= LIMIT:
    print("FAIL: the negative control was not detected: the legend check is blind"); ok = False

# (b) SVG text is text: each inline chart holds <text> elements, and Chromium's parsed
# page has the chart's title and axis labels as text inside it (not outlines)
dom = open(f"{work}/probe_dom.html", encoding="utf-8").read()
parts = dom.split('<svg class="stagecal-figure"')[1:]
if len(parts) != len(names):
    print(f"FAIL: {len(parts)} inline SVG charts in the parsed page, {len(names)} written"); ok = False
def text_check(part):
    part = part.split("</svg>", 1)[0]
    label = re.search(r'aria-label="([^"]*)"', part)
    ntext = len(re.findall(r"<text[ >]", part))
    text = " ".join(re.sub(r"<[^>]+>", " ", "".join(re.findall(r"<text[^>]*>.*?</text>", part, re.S))).split())
    words = [wd for wd in re.split(r"\W+", label.group(1) if label else "") if len(wd) > 3]
    missing = [wd for wd in words if wd not in text]
    return ntext, missing, ntext >= 3 and not missing and bool(words)
for name, part in zip(names, parts):
    ntext, missing, good = text_check(part)
    print(f"chart '{name}': {ntext} <text> elements; title words missing from the text: {missing or 'none'}")
    if not good:
        print(f"FAIL: chart '{name}': its text is not SVG text"); ok = False
    # date ticks read unambiguously: no two tick labels of a time axis say the same date
    # (years alone at half-year ticks once read "2025 2025 2026")
    dates = re.findall(r">\s*(\d{4}(?:-\d\d){0,2})\s*<", part.split("</svg>", 1)[0])
    if len(set(dates)) < len(dates):
        print(f"FAIL: chart '{name}': repeated date labels {dates}"); ok = False
# negative control of the text check: the known case with its labels as outlines (every
# <text> element replaced by a path, as a renderer that outlines glyphs writes them) must
# be caught
outlined = re.sub(r"<text[^>]*>.*?</text>", '<path d="M0 0h1v1z"/>', parts[names.index("known")], flags=re.S)
if text_check(outlined)[2]:
    print("FAIL: the text check passes a chart whose labels are outlines: it is blind"); ok = False
else:
    print("negative control (the known case's labels as outlines): caught")
sys.exit(0 if ok else 1)
EOF
