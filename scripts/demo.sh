#!/usr/bin/env bash
# Copyright 2026 outstage developers
# SPDX-License-Identifier: ISC
#
# The main job on an embedded default: installs what is missing, builds, and
# runs `outstage demo`, which synthesises its own program material, renders it
# through both stages at three designs and writes audio, plots and a report.
set -euo pipefail
cd "$(dirname "$0")/.."

bash scripts/deps.sh
if [ -f build/build.ninja ]; then
  meson setup --reconfigure build >/dev/null
else
  meson setup build -Dbuildtype=release >/dev/null
fi
ninja -C build >/dev/null
./build/cli/outstage demo "${1:-outstage-demo}"
echo
echo "outstage: audio (*.wav), plots (*.png) and report.txt are in ${1:-outstage-demo}/"
