#!/usr/bin/env bash
# Copyright 2026 outstage developers
# SPDX-License-Identifier: ISC
#
# Every test under valgrind's memcheck: a debug build of its own in
# build-valgrind (-O1 with debug information: valgrind's manual advises
# against -O2 and above, which can yield false uninitialised-value reports,
# and -O1 runs as fast as the release build here), then
# `meson test --setup valgrind` (the setup in meson.build: any memory error or
# definite or indirect leak fails the test). Extra arguments go to meson test,
# e.g. a suite: bash scripts/valgrind.sh --suite dsp. Prints the time taken.
set -euo pipefail
cd "$(dirname "$0")/.."

if ! command -v valgrind >/dev/null 2>&1; then
  echo "valgrind not found (Debian: apt-get install valgrind)" >&2
  exit 1
fi

dir=build-valgrind
options=(-Dbuildtype=debug -Doptimization=1 -Dwerror=true)
if [ -f "$dir/build.ninja" ]; then
  meson setup --reconfigure "$dir" "${options[@]}" >/dev/null
else
  meson setup "$dir" "${options[@]}" >/dev/null
fi
ninja -C "$dir"

start=$(date +%s)
meson test -C "$dir" --setup valgrind --print-errorlogs --num-processes 2 "$@"
echo "valgrind: every test passed under memcheck in $(($(date +%s) - start)) s"
