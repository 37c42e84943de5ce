#!/usr/bin/env bash
# Copyright 2026 outstage developers
# SPDX-License-Identifier: ISC
#
# The benchmark of docs/performance.md: installs what is missing, builds a
# release build in build-bench/ (or $OUTSTAGE_BENCH_BUILD), runs
# outstage-bench once with ngspice and the netlists of spice/, and writes
# the markdown tables, headed by what machine and build they come from, to
# build-bench/bench-results.md (or the file given with --out). Other arguments go to
# outstage-bench, e.g. --quick for a short run that only shows it works.
#
#   bash scripts/bench.sh                     # full run, about 5 minutes here
#   bash scripts/bench.sh --quick --out /tmp/quick.md
set -euo pipefail
cd "$(dirname "$0")/.."

builddir=${OUTSTAGE_BENCH_BUILD:-build-bench}
out=$builddir/bench-results.md
args=()
while [ $# -gt 0 ]; do
  case $1 in
    --out)
      out=$2
      shift 2
      ;;
    *)
      args+=("$1")
      shift
      ;;
  esac
done

bash scripts/deps.sh

if [ -f "$builddir/build.ninja" ]; then
  meson setup --reconfigure "$builddir" -Dbuildtype=release -Dwerror=true >/dev/null
else
  meson setup "$builddir" -Dbuildtype=release -Dwerror=true >/dev/null
fi
ninja -C "$builddir" bench/outstage-bench >/dev/null
mkdir -p "$(dirname "$out")"

ngspice=$(command -v ngspice || true)
spice_args=(--spice-dir "$PWD/spice")
if [ -n "$ngspice" ]; then
  spice_args+=(--ngspice "$ngspice")
fi

tmp=$(mktemp "${out}.XXXXXX")
trap 'rm -f "$tmp"' EXIT
{
  echo "<!-- written by scripts/bench.sh -->"
  echo
  echo "Machine: $(lscpu 2>/dev/null | sed -n 's/^Model name: *//p' | head -1),"\
    "$(nproc) cores, $(uname -sr); $(cc --version | head -1);" \
    "${ngspice:+$("$ngspice" -v 2>&1 | sed -n 's/^\*\* \(ngspice-[0-9]*\).*/\1/p' | head -1)};" \
    "outstage $(git describe --always --dirty 2>/dev/null || echo unknown), $(date -u +%Y-%m-%d)."
  echo
  "$builddir/bench/outstage-bench" "${spice_args[@]}" "${args[@]+"${args[@]}"}"
} | tee "$tmp"
mv "$tmp" "$out"
trap - EXIT
echo "outstage: benchmark tables written to $out" >&2
