#!/usr/bin/env bash
# Copyright 2026 outstage developers
# SPDX-License-Identifier: ISC
#
# Every test: installs what is missing, builds with warnings as errors, runs the
# whole suite, then the DSP, plugin and command-line suites again under
# AddressSanitizer and UndefinedBehaviorSanitizer, the suite under valgrind's
# memcheck, the fuzzers for a bounded time, and checks the formatting and lint.
set -euo pipefail
cd "$(dirname "$0")/.."

bash scripts/deps.sh

configure() { # dir, options...
  local dir=$1
  shift
  if [ -f "$dir/build.ninja" ]; then
    meson setup --reconfigure "$dir" "$@" >/dev/null
  else
    meson setup "$dir" "$@" >/dev/null
  fi
}

echo "== release build, all tests"
configure build -Dbuildtype=release -Dwerror=true
ninja -C build
meson test -C build --print-errorlogs --num-processes 2

echo "== sanitizers (address, undefined)"
configure build-sanitize -Dbuildtype=debug -Dwerror=true -Db_sanitize=address,undefined \
  -Db_lundef=false
ninja -C build-sanitize
# OS_TEST_SHORT: the heaviest tests on less material, the same checks (the
# release run above has them whole; docs/testing.md, "Under valgrind").
OS_TEST_SHORT=1 UBSAN_OPTIONS=halt_on_error=1:print_stacktrace=1 ASAN_OPTIONS=detect_leaks=1 \
  meson test -C build-sanitize --print-errorlogs --num-processes 2 --suite dsp --suite plugin \
  --suite cli

echo "== valgrind (memcheck)"
bash scripts/valgrind.sh

echo "== fuzzing (bounded; docs/fuzzing.md)"
bash scripts/fuzz.sh

echo "== clang-format"
find analysis bench cli dsp fuzz plugins tests tools -name '*.[ch]' -print0 | xargs -0 clang-format --dry-run --Werror

echo "== lint (cppcheck, clang-tidy)"
bash scripts/lint.sh build

echo "== benchmark (brief, to see that it runs)"
./build/bench/outstage-bench --quick --ngspice "$(command -v ngspice)" --spice-dir spice >/dev/null

echo "all checks passed"
