#!/usr/bin/env bash
# The browser checks: sluice's HTML reports in Debian's Chromium, driven by
# playwright-core with axe-core (both from npm, pinned in package.json and
# package-lock.json; nothing is downloaded at run time beyond `npm ci`).
#
#   bash tests/browser/run.sh               # every spec (*.mjs but lib.mjs)
#   bash tests/browser/run.sh report.mjs    # the named specs only
#
# It installs the npm packages when node_modules is missing, uses the
# release binary when it is newer than the sources and builds the debug
# one otherwise, and renders the demo's plan and its day-30 re-plan (made
# as demo/walkthrough.sh makes it) plus portfolios of other shapes. Each
# spec reads the manifest in $SLUICE_REPORTS and writes its screenshots to
# $SLUICE_SHOTS; a spec of another page can render what it needs itself.
# Screenshots stay in the folder printed at the end (SLUICE_SHOTS=DIR
# chooses it). The closing line is `N passed, M failed`.
set -uo pipefail
here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
root="$(cd "$here/../.." && pwd)"
cd "$root"

shots="${SLUICE_SHOTS:-$root/target/browser-shots}"
rm -rf "$shots"
mkdir -p "$shots"
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT
passed=0
failed=0
fail() { echo "FAILED: $*"; failed=$((failed + 1)); }
finish() {
    echo "screenshots: $shots"
    echo "$passed passed, $failed failed"
    [ "$failed" -eq 0 ] && [ "$passed" -gt 0 ]
    exit $?
}

for tool in node npm /usr/bin/chromium pdftoppm pdftotext; do
    command -v "$tool" >/dev/null 2>&1 || { fail "$tool is installed (CI's .ci/run installs it)"; finish; }
done
if [ ! -d "$here/node_modules/playwright-core" ] || [ ! -d "$here/node_modules/axe-core" ]; then
    (cd "$here" && npm ci --no-audit --no-fund --loglevel=error) || { fail "npm ci in tests/browser"; finish; }
fi

# The binary: release when it is up to date, else a debug build.
target="${CARGO_TARGET_DIR:-$root/target}"
case "$target" in /*) ;; *) target="$root/$target" ;; esac
fresh() { [ -x "$1" ] && [ -z "$(find src Cargo.toml Cargo.lock -newer "$1" -print -quit 2>/dev/null)" ]; }
bin="$target/release/sluice"
if ! fresh "$bin"; then
    bin="$target/debug/sluice"
    fresh "$bin" || cargo build --quiet --bin sluice || { fail "sluice builds"; finish; }
fi

# render NAME ARGS...: the HTML and JSON of one plan, added to the manifest.
manifest="$work/reports.json"
echo "[" >"$manifest"
sep=""
render() {
    local name="$1"
    shift
    if "$bin" "$@" --no-timing --format html --out "$work/$name.html" >/dev/null 2>"$work/$name.log" &&
        "$bin" "$@" --no-timing --format json --out "$work/$name.json" >/dev/null 2>>"$work/$name.log"; then
        printf '%s{"name":"%s","html":"%s","json":"%s"}\n' "$sep" "$name" "$work/$name.html" "$work/$name.json" >>"$manifest"
        sep=","
        passed=$((passed + 1))
        echo "ok: sluice renders $name"
    else
        cat "$work/$name.log"
        fail "sluice renders $name"
    fi
}

demo="portfolios/demo.yaml"
render plan plan "$demo"
# The re-plan at day 30, as demo/walkthrough.sh makes it.
if python3 demo/progress_from_plan.py "$work/plan.json" 2027-02-03 --traffic demo/traffic >"$work/progress.yaml"; then
    render replan replan "$demo" --progress "$work/progress.yaml" --today 2027-02-03 --previous "$work/plan.json"
else
    fail "the demo's day-30 progress file is made"
fi
# Other shapes (tests/browser/shapes.py): many pools, long names, one
# test, 300 tests. SLUICE_SHAPES=0 leaves them out.
if [ "${SLUICE_SHAPES:-1}" != 0 ]; then
    if python3 "$here/shapes.py" "$work/shapes"; then
        for f in "$work/shapes"/*.yaml; do
            render "$(basename "$f" .yaml)" plan "$f"
        done
    else
        fail "the portfolios of other shapes are made"
    fi
fi
echo "]" >>"$manifest"

specs=("$@")
if [ ${#specs[@]} -eq 0 ]; then
    for f in "$here"/*.mjs; do
        [ "$(basename "$f")" = lib.mjs ] || specs+=("$(basename "$f")")
    done
fi
for spec in "${specs[@]}"; do
    echo "== $spec"
    start=$(date +%s)
    SLUICE_BIN="$bin" SLUICE_REPORTS="$manifest" SLUICE_SHOTS="$shots" node "$here/$spec" 2>&1 | tee "$work/spec.log"
    echo "($spec took $(($(date +%s) - start)) s)"
    line="$(grep -E '^spec .*: [0-9]+ ok, [0-9]+ failed$' "$work/spec.log" | tail -1)"
    if [ -z "$line" ]; then
        fail "$spec runs to its end"
        continue
    fi
    passed=$((passed + $(sed -E 's/.*: ([0-9]+) ok.*/\1/' <<<"$line")))
    failed=$((failed + $(sed -E 's/.*ok, ([0-9]+) failed/\1/' <<<"$line")))
done
finish
