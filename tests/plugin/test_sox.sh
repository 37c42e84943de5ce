#!/bin/sh
# Copyright 2026 outstage developers
# SPDX-License-Identifier: ISC

# The LADSPA plugin in a real host: sox runs outstage_opamp on generated sines
# with control values passed by position in the contract's order
# (/work/shared/interface.md: enable fullscale drive gain rail headroom ilimit
# load gbw slew oversample listen trim), and sox's own `stat` measures the
# result against the physics.
#
# Usage: test_sox.sh SOX LADSPA_DIR     (exit 77: skipped)

set -eu

SOX=${1:-}
LADSPA_DIR=${2:-}
if [ -z "$SOX" ] || ! command -v "$SOX" >/dev/null 2>&1; then
    echo "sox not found; skipping"
    exit 77
fi
if [ ! -f "$LADSPA_DIR/outstage.so" ]; then
    echo "no outstage.so in $LADSPA_DIR" >&2
    exit 1
fi

# A sanitizer build of the plugin needs its runtime loaded first in sox, which
# is not instrumented; sox's own leaks are not ours to report.
asan_rt=$(ldd "$LADSPA_DIR/outstage.so" 2>/dev/null | awk '/libasan/ { print $3 }')
if [ -n "$asan_rt" ]; then
    echo "AddressSanitizer build: preloading $asan_rt into sox"
    LD_PRELOAD=$asan_rt
    ASAN_OPTIONS=${ASAN_OPTIONS:+$ASAN_OPTIONS:}detect_leaks=0
    export LD_PRELOAD ASAN_OPTIONS
fi

TMP=$(mktemp -d)
trap 'rm -rf "$TMP"' EXIT INT TERM

RATE=48000
failures=0

# gen NAME AMPLITUDE: 2 s of a 1 kHz sine, 32-bit float
gen() {
    "$SOX" -n -r $RATE -c 1 -b 32 -e floating-point "$TMP/$1.wav" synth 2 sine 1000 vol "$2"
}

# Under `meson test --setup valgrind` sox runs the plugin under memcheck
# (tests/valgrind/wrap.sh).
wrap=${OS_TEST_WRAP:-}

# run IN OUT CONTROL...: the plugin through sox's ladspa effect
run() {
    in=$1
    out=$2
    shift 2
    LADSPA_PATH=$LADSPA_DIR $wrap "$SOX" "$TMP/$in.wav" -b 32 -e floating-point "$TMP/$out.wav" \
        ladspa outstage outstage_opamp "$@"
}

# stat FILE FIELD: a figure from sox's `stat`, skipping the first 0.5 s
# (parameter ramps of 20 ms and the filters' latency)
stat_of() {
    "$SOX" "$TMP/$1.wav" -n trim 0.5 stat 2>&1 | awk -v f="$2" -F: '$1 ~ f { gsub(/ /, "", $2); print $2 }'
}

# check LABEL MEASURED EXPECTED RELATIVE_TOLERANCE
check() {
    if awk -v m="$2" -v e="$3" -v t="$4" 'BEGIN { d = (m - e) / e; if (d < 0) d = -d; exit !(d <= t) }'; then
        echo "ok   $1: measured $2, expected $3 (tolerance $4 relative)"
    else
        echo "FAIL $1: measured $2, expected $3 (tolerance $4 relative)"
        failures=$((failures + 1))
    fi
}

# 1. Current limiting. Contract, "Levels in and out": output sample =
#    vload / (G x fullscale), G = 10^(gain/20). A 0.5 FS sine at gain 6 dB and
#    fullscale 1 V asks for 1.0 V peak, i.e. 125 mA into 8 ohm; the op-amp's
#    25 mA limit holds the load at 25 mA x 8 ohm = 0.2 V (Ohm's law), so the
#    output peak is 0.2 / 1.995 = 0.1002. Tolerance 4 %: the limiter's soft knee
#    is VT / Rs = 25.9 mV / (0.65 V / 25 mA) = 1.0 mA wide, 4 % of the limit
#    (dsp/os_opamp.h). The unlimited answer, 0.5, lies far outside.
gen loud 0.5
for ilim in 25 50; do
    run loud "limited$ilim" 1 1 0 6 12 1.5 "$ilim" 8 1 0.5 4 0 0
    want=$(awk -v i="$ilim" 'BEGIN { printf "%.6f", i * 1e-3 * 8 / (10 ^ (6 / 20) * 1) }')
    check "peak at ilimit $ilim mA into 8 ohm" "$(stat_of "limited$ilim" "Maximum amplitude")" "$want" 0.04
    neg=$(stat_of "limited$ilim" "Minimum amplitude")
    check "negative peak at ilimit $ilim mA" "$(awk -v n="$neg" 'BEGIN { printf "%.6f", -n }')" "$want" 0.04
done

# 2. Clean: 0.1 FS into the default 32 ohm asks 6.2 mA, a quarter of the
#    limit, so by the contract the output equals the input. Tolerance 0.01 dB
#    (0.12 %): the op-amp's closed-loop magnitude error at 1 kHz is 2e-6 and the
#    half-band filters ripple by 1e-5 (see test_lv2_host.c, test_transparent).
gen clean 0.1
run clean clean_out 1 1 0 6 12 1.5 25 32 1 0.5 4 0 0
check "clean rms, out vs in" "$(stat_of clean_out "RMS +amplitude")" "$(stat_of clean "RMS +amplitude")" 0.00115
check "clean peak, out vs in" "$(stat_of clean_out "Maximum amplitude")" "$(stat_of clean "Maximum amplitude")" 0.00115

# 3. Defaults: with no control values sox takes the LADSPA default hints
#    (outputs included, which sox also asks for); at a clean level the plugin
#    must still run and stay transparent within the same tolerance.
run clean clean_defaults
check "clean rms with LADSPA defaults" "$(stat_of clean_defaults "RMS +amplitude")" "$(stat_of clean "RMS +amplitude")" 0.00115

if [ "$failures" -ne 0 ]; then
    echo "$failures check(s) failed"
    exit 1
fi
