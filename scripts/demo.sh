#!/usr/bin/env bash
# Copyright 2026 outstage developers
# SPDX-License-Identifier: ISC
#
# The main job on an embedded default: installs what is missing, builds, and
# loads the op-amp stage plugin from the build tree through lilv, as a host
# would, to report where several designs current-limit and clip.
set -euo pipefail
cd "$(dirname "$0")/.."

bash scripts/deps.sh
if [ -f build/build.ninja ]; then
  meson setup --reconfigure build >/dev/null
else
  meson setup build -Dbuildtype=release >/dev/null
fi
ninja -C build >/dev/null
./build/demo/outstage-preview build/outstage.lv2
