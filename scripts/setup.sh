#!/usr/bin/env bash
# Installs everything hewline needs on a fresh Debian bookworm machine, then
# builds the command into bin/hewline. Safe to run again: packages already
# installed are skipped, and apt-get update runs only when something is
# missing.
set -euo pipefail
cd "$(dirname "$0")/.."

# System packages:
#   libopencv-dev   OpenCV 4.6 for gocv v0.31.0 (video, filters, calibration, DNN)
#   libasound2-dev  ALSA headers for the speaker sink (oto/v2)
#   sox             outside measurement of generated cue and alarm WAVs (tests)
#   ffmpeg          ffprobe: outside frame counts of video files (tests)
#   opencv-doc      OpenCV's sample chessboard images left01..left14 (calibration test)
#   python3-onnx    onnx.checker, an outside check of exported CNN models (tests)
#   python3-prometheus-client  an outside parser of the /metrics text (tests)
#   chromium        headless rendering checks of the HTML report and the status page (tests)
packages=(libopencv-dev libasound2-dev sox ffmpeg opencv-doc python3-onnx python3-prometheus-client chromium pkg-config)

missing=()
for p in "${packages[@]}"; do
  if ! dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed"; then
    missing+=("$p")
  fi
done
if ((${#missing[@]})); then
  echo "setup: installing ${missing[*]}"
  SUDO=""
  if [ "$(id -u)" -ne 0 ]; then SUDO=sudo; fi
  $SUDO apt-get update -qq
  DEBIAN_FRONTEND=noninteractive $SUDO apt-get install -y -qq --no-install-recommends "${missing[@]}" >/dev/null
fi

if ! command -v go >/dev/null 2>&1; then
  if [ -x /usr/local/go/bin/go ]; then export PATH=$PATH:/usr/local/go/bin; else
    echo "setup: Go 1.26 or newer is needed (https://go.dev/doc/install)" >&2; exit 1
  fi
fi

go build -o bin/hewline ./cmd/hewline
echo "setup: built bin/hewline ($(bin/hewline version))"
