#!/bin/sh
# Copyright 2026 outstage developers
# SPDX-License-Identifier: ISC
#
# `outstage --help` and the man page describe every option, control and
# preset: the help is printed from the tool's option table, and every option
# it lists, every control symbol `outstage list` prints and every preset must
# appear in docs/outstage.1, which must format without a warning (groff -ww).
#
# Usage: test_docs.sh OUTSTAGE_EXE MAN_PAGE [GROFF]
set -u
exe=$1
# Under `meson test --setup valgrind` the tool runs under memcheck (tests/valgrind/wrap.sh).
wrap=${OS_TEST_WRAP:-}
man=$2
groff=${3:-}
failures=0
fail() {
  echo "FAIL: $*"
  failures=$((failures + 1))
}

help=$($wrap "$exe" --help) || fail "--help exits non-zero"
[ "$($wrap "$exe" help | head -1)" = "$(echo "$help" | head -1)" ] || fail "'help' differs from --help"
options=$(echo "$help" | sed -n 's/^  --\([a-z-]*\).*/\1/p')
[ -n "$options" ] || fail "no options in --help"
n=0
for o in $options; do
  n=$((n + 1))
  # roff writes a hyphen as \- ; the option appears as \-\-name.
  grep -qF -- "\\-\\-$(echo "$o" | sed 's/-/\\-/g')" "$man" || fail "man page lacks --$o"
done
echo "ok   $n options of --help in the man page"

symbols=$($wrap "$exe" list | sed -n 's/^  \([a-z_]*\) .*/\1/p' | sort -u)
n=0
for s in $symbols; do
  n=$((n + 1))
  grep -qE "^\.B $s\$" "$man" || fail "man page lacks control $s"
done
echo "$help" | grep -q "outstage list" || fail "--help does not point at 'outstage list'"
echo "ok   $n control symbols in the man page"

presets=$(echo "$help" | sed -n '/^presets:/,/^$/p' | sed -n 's/^  \([a-z-]*\) .*/\1/p')
n=0
for p in $presets; do
  n=$((n + 1))
  grep -qF -- ".B $(echo "$p" | sed 's/-/\\-/g')" "$man" || fail "man page lacks preset $p"
done
[ "$n" -ge 4 ] || fail "only $n presets"
echo "ok   $n presets in the man page"

for c in render measure plot demo list; do
  grep -q "^\.B outstage $c" "$man" || fail "man page synopsis lacks $c"
done
grep -q "^\.SH CAUTION" "$man" || fail "man page has no caution"

if [ -n "$groff" ]; then
  warnings=$("$groff" -man -ww -z "$man" 2>&1)
  [ -z "$warnings" ] || fail "groff warns: $warnings"
  echo "ok   groff -man -ww: no warnings"
fi
$wrap "$exe" --version | grep -q "^outstage [0-9]" || fail "--version"

if [ "$failures" -ne 0 ]; then
  echo "$failures failure(s)"
  exit 1
fi
echo "help and man page cover every option, control and preset"
