#!/usr/bin/env bash
# Renders the HTML report in headless Chromium and checks the screenshot.
#
#   bash tests/render_html.sh            # the report of tests/fixtures/plan-small.json
#   bash tests/render_html.sh REPORT.html
#
# Installs Debian's `chromium` when /usr/bin/chromium is missing (CI runs as
# root). The PNG is checked with python3's standard library only (zlib): the
# expected size, not blank, the charts' colours present. Prints
# `N passed, M failed` and exits non-zero when a check fails.
set -uo pipefail
cd "$(dirname "$0")/.."

WIDTH=1280
HEIGHT=2000
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT

passed=0
failed=0
check() { # name, then a command that must succeed
    local name="$1"
    shift
    if "$@"; then
        echo "ok: $name"
        passed=$((passed + 1))
    else
        echo "FAILED: $name"
        failed=$((failed + 1))
    fi
}
finish() {
    echo "$passed passed, $failed failed"
    [ "$failed" -eq 0 ]
    exit $?
}

if [ ! -x /usr/bin/chromium ]; then
    echo "installing chromium (Debian package)"
    if ! { apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq chromium; } >"$work/apt.log" 2>&1; then
        tail -20 "$work/apt.log"
        check "chromium is installed" false
        finish
    fi
fi

if [ $# -ge 1 ]; then
    report="$(realpath "$1")"
else
    report="$work/report.html"
    if ! cargo run --quiet --example render_plan -- tests/fixtures/plan-small.json html "$report"; then
        check "the fixture plan renders to html" false
        finish
    fi
fi
check "the report exists" test -s "$report"

png="$work/report.png"
timeout 120 /usr/bin/chromium --headless --no-sandbox --disable-gpu --no-first-run \
    --disable-background-networking --disable-component-update --disable-sync \
    --user-data-dir="$work/profile" --hide-scrollbars \
    --window-size="$WIDTH,$HEIGHT" --screenshot="$png" "file://$report" \
    >"$work/chromium.log" 2>&1
status=$?
[ $status -eq 0 ] || tail -20 "$work/chromium.log"
check "chromium exits cleanly" test $status -eq 0
check "chromium wrote a screenshot" test -s "$png"

if [ -s "$png" ]; then
    python3 - "$png" "$WIDTH" "$HEIGHT" >"$work/image-checks.txt" <<'PY'
import struct
import sys
import zlib

path, want_w, want_h = sys.argv[1], int(sys.argv[2]), int(sys.argv[3])
data = open(path, "rb").read()
results = []


def check(name, ok):
    results.append((name, bool(ok)))


check("png signature", data[:8] == b"\x89PNG\r\n\x1a\n")
pos, chunks = 8, []
while pos < len(data):
    (length,) = struct.unpack(">I", data[pos : pos + 4])
    kind = data[pos + 4 : pos + 8]
    chunks.append((kind, data[pos + 8 : pos + 8 + length]))
    pos += 12 + length
ihdr = dict(chunks).get(b"IHDR", b"")
width, height, depth, colour, _, _, interlace = struct.unpack(">IIBBBBB", ihdr)
check(f"size {width}x{height} is {want_w}x{want_h}", (width, height) == (want_w, want_h))
check("8-bit RGB or RGBA, not interlaced", depth == 8 and colour in (2, 6) and interlace == 0)

# Decode: inflate the IDAT stream and undo the per-row filters (PNG
# specification, section 9: None, Sub, Up, Average, Paeth).
raw = zlib.decompress(b"".join(body for kind, body in chunks if kind == b"IDAT"))
bpp = 4 if colour == 6 else 3
stride = width * bpp
rows, prev, i = [], bytearray(stride), 0
for _ in range(height):
    ftype, line = raw[i], bytearray(raw[i + 1 : i + 1 + stride])
    i += 1 + stride
    if ftype == 1:
        for x in range(bpp, stride):
            line[x] = (line[x] + line[x - bpp]) & 0xFF
    elif ftype == 2:
        for x in range(stride):
            line[x] = (line[x] + prev[x]) & 0xFF
    elif ftype == 3:
        for x in range(stride):
            left = line[x - bpp] if x >= bpp else 0
            line[x] = (line[x] + ((left + prev[x]) >> 1)) & 0xFF
    elif ftype == 4:
        for x in range(stride):
            a = line[x - bpp] if x >= bpp else 0
            b = prev[x]
            c = prev[x - bpp] if x >= bpp else 0
            p = a + b - c
            pa, pb, pc = abs(p - a), abs(p - b), abs(p - c)
            pred = a if pa <= pb and pa <= pc else (b if pb <= pc else c)
            line[x] = (line[x] + pred) & 0xFF
    rows.append(bytes(line))
    prev = line

pixels = {}
non_white = 0
for row in rows:
    for x in range(0, stride, bpp):
        rgb = row[x : x + 3]
        pixels[rgb] = pixels.get(rgb, 0) + 1
        if rgb != b"\xff\xff\xff":
            non_white += 1
total = width * height


def near(hex_colour, tolerance=6):
    want = bytes.fromhex(hex_colour)
    return sum(
        n for rgb, n in pixels.items() if all(abs(rgb[k] - want[k]) <= tolerance for k in range(3))
    )


check(f"not blank ({100 * non_white / total:.1f}% of pixels drawn)", non_white > total * 0.03)
check(f"not one flat colour ({len(pixels)} colours)", len(pixels) > 200)
# Colours the report itself uses: the first two pools' bars and today's line.
check("first pool's bars are drawn", near("1f5f8b") > 2000)
check("second pool's bars are drawn", near("8a4f0a") > 2000)
check("today's line is drawn", near("b3261e") > 50)
# The page is laid out top to bottom: something drawn in each quarter.
quarters = [rows[q * height // 4 : (q + 1) * height // 4] for q in range(4)]
for q, part in enumerate(quarters):
    drawn = sum(1 for row in part if row.count(b"\xff") < stride - bpp * 4)
    check(f"quarter {q + 1} of the page has content", drawn > 10)

for name, ok in results:
    print(("ok: " if ok else "FAILED: ") + name)
sys.exit(0 if all(ok for _, ok in results) else 1)
PY
    py=$?
    cat "$work/image-checks.txt"
    passed=$((passed + $(grep -c '^ok: ' "$work/image-checks.txt")))
    failed=$((failed + $(grep -c '^FAILED: ' "$work/image-checks.txt")))
    # A crash in the checker itself counts as a failure too.
    if [ $py -ne 0 ] && ! grep -q '^FAILED: ' "$work/image-checks.txt"; then
        check "the image checker runs" false
    fi
fi

finish
