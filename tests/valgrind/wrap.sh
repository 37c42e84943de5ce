#!/bin/sh
# Copyright 2026 outstage developers
# SPDX-License-Identifier: ISC
#
# The exe_wrapper of `meson test --setup valgrind` (top-level meson.build):
#
#   wrap.sh BUILD_ROOT VALGRIND [OPTION]... -- TEST [ARG]...
#
# A test program built in BUILD_ROOT runs under memcheck with the options
# given (it traces the children it starts from the build tree; system programs
# such as ngspice and /bin/sh run natively). A test that is an interpreter or
# a script (shell, Python) runs natively, because memcheck cannot run Debian's
# Python with scipy (scipy's Boost ufuncs fail to initialise: memcheck does
# long double arithmetic in 64 bits) and a shell's own allocations are not
# ours to check; it finds the same memcheck command line in OS_TEST_WRAP and
# puts it in front of every built program it starts (tests/cli/*.sh,
# tests/cli/test_outside.py, tests/filters/check_filters.py,
# tests/plugin/test_sox.sh). The options hold no spaces, so OS_TEST_WRAP is
# split on blanks.
set -eu
build=$1
shift
vg=""
while [ "$#" -gt 0 ] && [ "$1" != "--" ]; do
  vg="$vg $1"
  shift
done
if [ "$#" -eq 0 ]; then
  echo "usage: wrap.sh BUILD_ROOT VALGRIND [OPTION]... -- TEST [ARG]..." >&2
  exit 2
fi
shift
vg=${vg# }

case "$1" in
"$build"/*)
  # shellcheck disable=SC2086 # the options are words
  exec $vg "$@"
  ;;
esac
OS_TEST_WRAP=$vg
export OS_TEST_WRAP
exec "$@"
