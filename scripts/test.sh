#!/bin/sh
# Install the system packages the tests need (only when missing), the test extras, and run every test.
set -eu
cd "$(dirname "$0")/.."
missing=""
command -v chromium >/dev/null 2>&1 || missing="$missing chromium"
fc-list 2>/dev/null | grep -qi "DejaVu Sans" || missing="$missing fonts-dejavu-core"
fc-list 2>/dev/null | grep -qi "Liberation" || missing="$missing fonts-liberation"
for pkg in libpango-1.0-0 libpangoft2-1.0-0 libharfbuzz-subset0 poppler-utils; do  # WeasyPrint, PDF checks
    dpkg -s "$pkg" >/dev/null 2>&1 || missing="$missing $pkg"
done
if [ -n "$missing" ]; then
    SUDO=""
    [ "$(id -u)" -eq 0 ] || SUDO="sudo"
    $SUDO apt-get install -y --no-install-recommends $missing || {
        $SUDO apt-get update && $SUDO apt-get install -y --no-install-recommends $missing; }
fi
python3 -m pip install --quiet -e '.[test]'
python3 -m pytest -q
