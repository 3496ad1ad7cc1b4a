#!/usr/bin/env bash
# Regenerates the scenario suite, replays every scene and writes the score
# table into README.md (between its scores markers).
set -euo pipefail
cd "$(dirname "$0")/.."
bash scripts/setup.sh
bin/hewline demo -scenario all -out out/suite -readme README.md "$@"
