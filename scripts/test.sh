#!/usr/bin/env bash
# Sets up the machine (scripts/setup.sh) and runs the whole test suite with
# gocv's Mat profiler on, so that any Mat left open fails the tests.
set -euo pipefail
cd "$(dirname "$0")/.."
bash scripts/setup.sh
go vet -tags matprofile ./...
go test -tags matprofile -count=1 -timeout 20m ./...
