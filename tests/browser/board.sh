#!/usr/bin/env bash
# The planning board's browser checks: `sluice board` on the demo in
# Debian's Chromium, driven by playwright-core (from npm, pinned in
# package.json and package-lock.json; nothing is downloaded at run time
# beyond `npm ci`). Needs node, npm and /usr/bin/chromium.
#
#   bash tests/browser/board.sh
#   SLUICE_README_SHOT=docs/board.png bash tests/browser/board.sh   # also the README's picture
#
# It installs the npm packages when node_modules is missing, builds the
# release binary, runs board.mjs and closes with `N passed, M failed`.
set -uo pipefail
here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
root="$(cd "$here/../.." && pwd)"
cd "$root"
passed=0
failed=0
finish() {
    echo "$passed passed, $failed failed"
    [ "$failed" -eq 0 ] && [ "$passed" -gt 0 ]
    exit $?
}
for tool in node npm /usr/bin/chromium; do
    command -v "$tool" >/dev/null 2>&1 || { echo "FAILED: $tool is installed"; failed=1; finish; }
done
if [ ! -d "$here/node_modules/playwright-core" ]; then
    (cd "$here" && npm ci --no-audit --no-fund --loglevel=error) || { echo "FAILED: npm ci"; failed=1; finish; }
fi
target="${CARGO_TARGET_DIR:-$root/target}"
case "$target" in /*) ;; *) target="$root/$target" ;; esac
cargo build --release --quiet --bin sluice || { echo "FAILED: sluice builds"; failed=1; finish; }
log="$(mktemp)"
trap 'rm -f "$log"' EXIT
SLUICE_BIN="$target/release/sluice" node "$here/board.mjs" 2>&1 | tee "$log"
line="$(grep -E '^spec board.mjs: [0-9]+ ok, [0-9]+ failed$' "$log" | tail -1)"
if [ -z "$line" ]; then
    echo "FAILED: board.mjs runs to its end"
    failed=1
else
    passed=$(sed -E 's/.*: ([0-9]+) ok.*/\1/' <<<"$line")
    failed=$(sed -E 's/.*ok, ([0-9]+) failed/\1/' <<<"$line")
fi
finish
