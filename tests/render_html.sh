#!/usr/bin/env bash
# Renders the HTML report in headless Chromium and checks the screenshot.
#
#   bash tests/render_html.sh            # the demo's report and the fixture's
#   bash tests/render_html.sh REPORT.html
#
# With no argument it renders two reports: the real one the binary writes
# for the demo portfolio (`sluice plan portfolios/demo.yaml --format html
# --out ...`: 32 tests in 5 pools), and the one of the small fixture plan
# tests/fixtures/plan-small.json. It builds with cargo when the binary is
# missing or older than the sources.
#
# Installs Debian's `chromium` when /usr/bin/chromium is missing (CI runs as
# root). The PNG is checked with python3's standard library only (zlib): the
# expected size, not blank, each pool's colour present, today's line drawn.
# Prints `N passed, M failed` and exits non-zero when a check fails.
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

# render_and_check NAME REPORT.html POOLS: screenshots REPORT.html and checks
# the image; POOLS is how many pools' colours must show.
render_and_check() {
    local name="$1" report="$2" pools="$3"
    check "$name: the report exists" test -s "$report"
    local png="$work/$name.png"
    timeout 120 /usr/bin/chromium --headless --no-sandbox --disable-gpu --no-first-run \
        --disable-background-networking --disable-component-update --disable-sync \
        --user-data-dir="$work/profile-$name" --hide-scrollbars \
        --window-size="$WIDTH,$HEIGHT" --screenshot="$png" "file://$report" \
        >"$work/chromium-$name.log" 2>&1
    local status=$?
    [ $status -eq 0 ] || tail -20 "$work/chromium-$name.log"
    check "$name: chromium exits cleanly" test $status -eq 0
    check "$name: chromium wrote a screenshot" test -s "$png"
    [ -s "$png" ] || return 0
    python3 - "$png" "$WIDTH" "$HEIGHT" "$pools" >"$work/image-checks.txt" <<'PY'
import struct
import sys
import zlib

path, want_w, want_h, pools = sys.argv[1], int(sys.argv[2]), int(sys.argv[3]), int(sys.argv[4])
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
# Colours the report itself uses (POOL_FILLS in src/render/html.rs): each
# pool's bars, and today's line.
fills = ["1f5f8b", "8a4f0a", "5b3f8c", "2d6a3e", "8c2f4b"]
for k in range(pools):
    check(f"pool {k + 1}'s bars are drawn (#{fills[k % 5]})", near(fills[k % 5]) > 2000)
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
    local py=$?
    sed "s/^\(ok\|FAILED\): /\1: $name: /" "$work/image-checks.txt"
    passed=$((passed + $(grep -c '^ok: ' "$work/image-checks.txt")))
    failed=$((failed + $(grep -c '^FAILED: ' "$work/image-checks.txt")))
    # A crash in the checker itself counts as a failure too.
    if [ $py -ne 0 ] && ! grep -q '^FAILED: ' "$work/image-checks.txt"; then
        check "$name: the image checker runs" false
    fi
}

# has_text NAME REPORT.html TEXT: the report's source holds TEXT.
has_text() {
    check "$1: the report names $3" grep -qF -- "$3" "$2"
}

if [ $# -ge 1 ]; then
    render_and_check "given" "$(realpath "$1")" 2
    finish
fi

# The demo, through the real binary. Build when the binary is missing or
# older than any source file.
bin="target/debug/sluice"
if [ ! -x "$bin" ] || [ -n "$(find src Cargo.toml Cargo.lock -newer "$bin" -print -quit 2>/dev/null)" ]; then
    if ! cargo build --quiet --bin sluice; then
        check "sluice builds" false
        finish
    fi
fi
demo="$work/plan.html"
if "$bin" plan portfolios/demo.yaml --format html --out "$demo" 2>"$work/plan.log"; then
    check "sluice plan writes the demo's report" true
    # What the screenshot cannot tell: every test and pool is in it.
    for id in $(grep -E '^  - id: ' portfolios/demo.yaml | sed 's/^  - id: //'); do
        has_text demo "$demo" "$id"
    done
    render_and_check demo "$demo" 5
else
    cat "$work/plan.log"
    check "sluice plan writes the demo's report" false
fi

# The small fixture plan, through the library (no scheduler run).
fixture="$work/fixture.html"
if cargo run --quiet --example render_plan -- tests/fixtures/plan-small.json html "$fixture"; then
    render_and_check fixture "$fixture" 2
else
    check "the fixture plan renders to html" false
fi

finish
