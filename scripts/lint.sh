#!/usr/bin/env bash
# Copyright 2026 outstage developers
# SPDX-License-Identifier: ISC
#
# Static checks with warnings as errors: cppcheck and clang-tidy (.clang-tidy)
# over the sources that ship (not the tests), using the compile commands of a
# build directory (default: build).
set -euo pipefail
cd "$(dirname "$0")/.."
build=${1:-build}
sources=$(ls dsp/*.c plugins/*/*.c cli/*.c analysis/*.c tools/*.c bench/*.c)

echo "== cppcheck"
cppcheck --enable=warning,performance,portability --inline-suppr --error-exitcode=1 \
  --std=c11 -q -Idsp -Ianalysis -Icli $sources

echo "== clang-tidy"
clang-tidy -p "$build" --quiet $sources 2>&1 | grep -v "warnings generated" || true
clang-tidy -p "$build" --quiet $sources >/dev/null 2>&1
echo "lint clean"
