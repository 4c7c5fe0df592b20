#!/bin/sh
# Install dossier and build the demo dossier site into ./site (prints where index.html is).
set -eu
cd "$(dirname "$0")/.."
python3 -m pip install --quiet -e .
dossier check demo_project
dossier build demo_project --out site
