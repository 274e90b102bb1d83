#!/usr/bin/env bash
# Checks sluice's sizing engine against scipy and statsmodels (PyPI), and
# the forecast fitted from a history against statsmodels' decomposition,
# damped Holt-Winters and MSTL and ruptures' PELT (check_forecast.py),
# and result ranges against scipy's
# lognormal and inverse Gaussian quantiles (check_ranges.py).
#
# Creates (or reuses) a virtual environment in tests/reference/.venv, installs
# the pinned references from requirements.txt, builds the release binary if
# it is missing or older than the sources, and runs check_sizing.py and
# check_forecast.py, each of which prints `N passed, M failed`; exits
# non-zero when either fails.
#
# Needs python3 with the venv module (on Debian's own python3: the
# `python3-venv` package). Environment: PYTHON (default python3),
# SLUICE_BIN (default target/release/sluice under the repository root).
set -euo pipefail

here="$(cd "$(dirname "$0")" && pwd)"
root="$(cd "$here/../.." && pwd)"
venv="$here/.venv"
python="${PYTHON:-python3}"
stamp="$venv/.requirements.installed"

# A venv whose interpreter is gone (the Python it was made from moved) is
# made again.
if [ -e "$venv" ] && ! "$venv/bin/python" -c 'import sys' >/dev/null 2>&1; then
    echo "reference: tests/reference/.venv is broken; making it again" >&2
    rm -rf "$venv"
fi

if [ ! -x "$venv/bin/python" ]; then
    echo "reference: creating virtual environment in tests/reference/.venv" >&2
    if ! "$python" -m venv "$venv"; then
        rm -rf "$venv"
        echo "reference: \`$python -m venv\` failed; on Debian install the \`python3-venv\` package" >&2
        exit 1
    fi
fi

# Install only when the pinned list changed since the last install.
if [ ! -f "$stamp" ] || ! cmp -s "$here/requirements.txt" "$stamp"; then
    echo "reference: installing pinned scipy and statsmodels" >&2
    "$venv/bin/python" -m pip install --quiet --disable-pip-version-check \
        -r "$here/requirements.txt"
    cp "$here/requirements.txt" "$stamp"
fi

bin="${SLUICE_BIN:-$root/target/release/sluice}"
if [ -z "${SLUICE_BIN:-}" ]; then
    # cargo decides whether anything changed; a no-op build is quick.
    (cd "$root" && cargo build --release --quiet --bin sluice)
fi

status=0
"$venv/bin/python" "$here/check_sizing.py" --bin "$bin" || status=1
"$venv/bin/python" "$here/check_forecast.py" --bin "$bin" || status=1
"$venv/bin/python" "$here/check_ranges.py" --bin "$bin" || status=1
exit $status
