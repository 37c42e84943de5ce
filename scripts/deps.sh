#!/usr/bin/env bash
# Copyright 2026 outstage developers
# SPDX-License-Identifier: ISC
#
# Installs the Debian 12 packages outstage needs to build and test, if any are
# missing. Runs apt-get as root, or through sudo otherwise.
set -euo pipefail

packages=(
  gcc pkg-config meson ninja-build
  lv2-dev liblilv-dev lilv-utils ladspa-sdk
  libcmocka-dev ngspice sox sordi serdi clang-format clang-tidy cppcheck
  libsndfile1-dev libfftw3-dev libcairo2-dev python3-numpy python3-scipy groff-base
  valgrind clang libclang-rt-14-dev
)

missing=()
for p in "${packages[@]}"; do
  if ! dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed"; then
    missing+=("$p")
  fi
done

if [ "${#missing[@]}" -gt 0 ]; then
  sudo=""
  if [ "$(id -u)" -ne 0 ]; then
    sudo="sudo"
  fi
  echo "outstage: installing ${missing[*]}"
  export DEBIAN_FRONTEND=noninteractive
  $sudo apt-get update
  $sudo apt-get install -y --no-install-recommends "${missing[@]}"
fi
