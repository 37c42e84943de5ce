#!/bin/sh
# Copyright 2026 outstage developers
# SPDX-License-Identifier: ISC

# Each plugin object exports its descriptor function and nothing else (house
# style: hidden visibility, only the descriptor is public), so the DSP
# library's symbols cannot clash with a host's or another plugin's.
#
# Usage: test_exports.sh NM OBJECT SYMBOL [OBJECT SYMBOL]...   (exit 77: skipped)

set -u
NM=${1:-}
shift
if [ -z "$NM" ] || ! command -v "$NM" >/dev/null 2>&1; then
    echo "nm not found; skipping"
    exit 77
fi
failures=0
while [ "$#" -ge 2 ]; do
    obj=$1
    want=$2
    shift 2
    # defined dynamic symbols of code or data, as "TYPE NAME"
    got=$("$NM" -D --defined-only "$obj" | awk 'NF == 3 && $2 ~ /^[TDBRVW]$/ { print $3 }' | sort)
    if [ "$got" = "$want" ]; then
        echo "ok   $(basename "$(dirname "$obj")")/$(basename "$obj") exports only $want"
    else
        echo "FAIL $obj exports:"
        echo "$got"
        failures=$((failures + 1))
    fi
done
[ "$failures" -eq 0 ] || exit 1
