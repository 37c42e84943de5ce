#!/bin/sh
# Copyright 2026 outstage developers
# SPDX-License-Identifier: ISC
#
# `outstage demo` as CI runs it: it finishes, and writes the material, one
# render per design and stage, a transfer and a THD plot of each (PNG, by
# their signature), and the report; every render peaks below 0 dBFS with no
# clipped sample (read from report.json with Debian's Python when present).
# The time taken is printed, not asserted.
#
# Usage: test_demo.sh OUTSTAGE_EXE [PYTHON3]
set -u
exe=$1
if [ -n "${OS_TEST_SHORT:-}" ]; then
  # the valgrind setup: the demo's fixed material takes over 4 minutes under
  # memcheck (docs/testing.md, "Under valgrind")
  echo "skipped under OS_TEST_SHORT"
  exit 77
fi
python=${2:-}
t=$(mktemp -d /tmp/outstage-demo-XXXXXX)
trap 'rm -rf "$t"' EXIT
failures=0
fail() {
  echo "FAIL: $*"
  failures=$((failures + 1))
}

start=$(date +%s.%N)
"$exe" demo "$t/demo" >"$t/stdout" || fail "demo exits non-zero"
end=$(date +%s.%N)
echo "demo took $(awk "BEGIN { printf \"%.1f\", $end - $start }") s (wall clock, not asserted)"
cat "$t/stdout"

magic() { # file, expected hex of the first bytes
  [ "$(head -c "$(($(printf '%s' "$2" | wc -c) / 2))" "$1" | od -An -tx1 | tr -d ' \n')" = "$2" ]
}
magic "$t/demo/material.wav" 52494646 || fail "material.wav is not RIFF"
n=0
for d in battery-practice headphone-desk bench-classab; do
  for s in opamp pushpull; do
    for f in "$d-$s.wav" "$d-$s-transfer.png" "$d-$s-thd.png"; do
      [ -s "$t/demo/$f" ] || fail "missing $f"
      n=$((n + 1))
    done
    magic "$t/demo/$d-$s.wav" 52494646 || fail "$d-$s.wav is not RIFF/WAVE"
    magic "$t/demo/$d-$s-thd.png" 89504e470d0a1a0a || fail "$d-$s-thd.png is not PNG"
    magic "$t/demo/$d-$s-transfer.png" 89504e470d0a1a0a || fail "$d-$s-transfer.png is not PNG"
  done
done
[ -s "$t/demo/report.txt" ] && [ -s "$t/demo/report.json" ] || fail "missing report"
cmp -s "$t/demo/report.txt" "$t/stdout" || fail "printed report differs from report.txt"
echo "ok   $n audio and plot files, material.wav, report.txt, report.json"
leftover=$(ls -A "$t/demo" | grep '^\.' || true)
[ -z "$leftover" ] || fail "temporary files left: $leftover"

if [ -n "$python" ]; then
  "$python" - "$t/demo/report.json" <<'PY' || fail "report.json checks"
import json, sys
r = json.load(open(sys.argv[1]))
renders = r["renders"]
assert len(renders) == 6, len(renders)
for x in renders:
    assert x["clipped_samples"] == 0, x
    assert x["file_peak_dbfs"] < 0.0, x
    assert x["output_peak_dbfs"] < 0.0, x
    assert x["clip_onset_vout_peak"] is None or x["clip_onset_vout_peak"] > 0.0, x
print("ok   report.json: 6 renders, none clipped, every file below 0 dBFS")
PY
fi

if [ "$failures" -ne 0 ]; then
  echo "$failures failure(s)"
  exit 1
fi
echo "demo produced its files"
