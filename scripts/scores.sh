#!/usr/bin/env bash
# Regenerates the scenario suite, replays every scene (and the plain
# reference follower on every stripe scene) and writes the score tables
# into README.md (between its scores markers).
#
# Every scene at 160x120, 320x240 and 640x480; at 1280x720 (about three
# times the rendering of 640x480) a subset: the real-camera scenes of
# issue 10 plus a few of the rest, to keep the run near 15 minutes on two
# cores. Extra arguments go to hewline demo (e.g. -jobs 1).
set -euo pipefail
cd "$(dirname "$0")/.."
bash scripts/setup.sh
hd_subset="dashed dashed-short dashed-long dotted low-camera blur-heavy rolling-shutter exposure-drift jpeg-low fisheye-tight uneven-paint weave curves gap lane-straight lane-s-curve"
scenes="all@160x120,all@320x240,all@640x480"
for s in $hd_subset; do
	scenes="$scenes,$s@1280x720"
done
bin/hewline demo -scenario "$scenes" -baseline -out out/suite -readme README.md "$@"
