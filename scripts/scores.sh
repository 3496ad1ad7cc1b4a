#!/usr/bin/env bash
# Regenerates the scenario suite, replays every scene (and the plain
# reference follower on every stripe scene) and writes the score tables
# into README.md (between its scores markers).
#
# Every scene at 160x120, 320x240 and 640x480; at 1280x720 (about three
# times the rendering of 640x480) a subset: the real-camera scenes of
# issue 10 plus a few of the rest. Measured on the 2-core machine (CPU
# time, with the reference follower): all 40 scenes at 160x120 94 s, at
# 320x240 224 s; from those (cost ≈ 51 s + 43 s per 160x120's worth of
# pixels, for the 40) about 740 s at 640x480 and 900 s for the subset at
# 1280x720: about 33 CPU-minutes, some 17 minutes on two idle cores. Every
# scene at 1280x720 would add about 20 minutes more. Extra arguments go to
# hewline demo (e.g. -jobs 1).
set -euo pipefail
cd "$(dirname "$0")/.."
bash scripts/setup.sh
hd_subset="dashed dashed-short dashed-long dotted low-camera blur-heavy rolling-shutter exposure-drift jpeg-low fisheye-tight uneven-paint weave curves gap lane-straight lane-s-curve"
scenes="all@160x120,all@320x240,all@640x480"
for s in $hd_subset; do
	scenes="$scenes,$s@1280x720"
done
bin/hewline demo -scenario "$scenes" -baseline -out out/suite -readme README.md "$@"
