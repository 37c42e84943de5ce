#!/usr/bin/env bash
# Copyright 2026 outstage developers
# SPDX-License-Identifier: ISC
#
# Fuzzing (docs/fuzzing.md): builds the libFuzzer harnesses in build-fuzz
# (clang, AddressSanitizer, UndefinedBehaviorSanitizer), replays every kept
# regression input (fuzz/regressions/<harness>/), then runs each harness for
# FUZZ_SECONDS (default 60) on a fresh corpus seeded from fuzz/seeds/<harness>/.
# Exits non-zero on any finding; the inputs that found something are copied
# to build-fuzz/findings/<harness>/.
#
# Needs clang and libclang-rt-14-dev (Debian 12) besides the build's own
# packages. Environment: FUZZ_SECONDS (per harness), FUZZ_HARNESSES (default
# "stage cli"), FUZZ_BUILD (default build-fuzz).
set -euo pipefail
cd "$(dirname "$0")/.."

seconds=${FUZZ_SECONDS:-60}
build=${FUZZ_BUILD:-build-fuzz}
read -r -a harnesses <<<"${FUZZ_HARNESSES:-stage cli}"

if ! command -v clang >/dev/null; then
  echo "fuzz: clang not found; install clang and libclang-rt-14-dev" >&2
  exit 1
fi

# Coverage instrumentation for every library (fuzzer-no-link), without the
# comparison tracing, which made the DSP library 2.5 times slower to run for
# branches on floating-point values it cannot help with.
options=(-Dfuzz=true -Dtests=false -Ddocs=false -Dbuildtype=debugoptimized -Dwerror=true
  -Db_sanitize=address,undefined -Db_lundef=false
  "-Dc_args=-fsanitize=fuzzer-no-link -fno-sanitize-coverage=trace-cmp")
echo "== fuzz: build ($build)"
if [ -f "$build/build.ninja" ]; then
  meson setup --reconfigure "$build" "${options[@]}" >/dev/null
else
  CC=clang meson setup "$build" "${options[@]}" >/dev/null
fi
targets=()
for h in "${harnesses[@]}"; do
  targets+=("fuzz/fuzz_$h")
done
ninja -C "$build" "${targets[@]}"

work=$(mktemp -d "${TMPDIR:-/tmp}/outstage-fuzz.XXXXXX")
trap 'rm -rf "$work"' EXIT
# The CLI harness's private directory for the files it renders goes here, so
# that one killed by a finding leaves nothing behind once this script ends.
export FUZZ_TMPDIR="$work"
export UBSAN_OPTIONS=halt_on_error=1:print_stacktrace=1
export ASAN_OPTIONS=detect_leaks=1
# leaks inside system libraries, each explained there
export LSAN_OPTIONS="suppressions=$PWD/fuzz/lsan.supp"

keep() { # harness, files...: copy what found something where it outlives $work
  local h=$1
  shift
  mkdir -p "$build/findings/$h"
  cp "$@" "$build/findings/$h/"
  echo "fuzz: kept in $build/findings/$h/: $(cd "$build/findings/$h" && ls | tr '\n' ' ')"
}

echo "== fuzz: replay regressions"
failed=0
for h in "${harnesses[@]}"; do
  bin="$build/fuzz/fuzz_$h"
  count=0
  for f in fuzz/regressions/"$h"/*; do
    [ -f "$f" ] || continue
    count=$((count + 1))
    if ! "$bin" "$f" >"$work/replay.log" 2>&1; then
      echo "fuzz: $h: regression $f fails again:"
      grep -E "FINDING|ERROR|runtime error|SUMMARY" "$work/replay.log" | head -5
      keep "$h" "$f"
      failed=1
    fi
  done
  echo "fuzz: $h: $count regression inputs replayed"
done
if [ "$failed" -ne 0 ]; then
  exit 1
fi

for h in "${harnesses[@]}"; do
  echo "== fuzz: $h for $seconds s"
  bin="$build/fuzz/fuzz_$h"
  corpus="$work/corpus-$h"
  artifacts="$work/artifacts-$h"
  mkdir -p "$corpus" "$artifacts"
  if [ -d "fuzz/seeds/$h" ]; then
    find "fuzz/seeds/$h" -maxdepth 1 -type f ! -name '*.py' -exec cp {} "$corpus/" \;
  fi
  rc=0
  "$bin" -max_total_time="$seconds" -timeout=10 -rss_limit_mb=2048 -print_final_stats=1 \
    -artifact_prefix="$artifacts/" "$corpus" >"$work/$h.log" 2>&1 || rc=$?
  runs=$(sed -n 's/^stat::number_of_executed_units: *//p' "$work/$h.log")
  echo "fuzz: $h: ${runs:-?} executions, exit status $rc"
  if [ "$rc" -ne 0 ] || [ -n "$(ls -A "$artifacts")" ]; then
    grep -E "FINDING|ERROR|runtime error|SUMMARY|Test unit written" "$work/$h.log" | head -10
    if [ -n "$(ls -A "$artifacts")" ]; then
      keep "$h" "$artifacts"/*
    fi
    failed=1
  fi
done

if [ "$failed" -ne 0 ]; then
  echo "fuzz: findings; see above and docs/fuzzing.md (minimise, keep, fix)" >&2
  exit 1
fi
echo "fuzz: no findings"
