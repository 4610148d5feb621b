#!/bin/sh
# Install what jeansgrow needs from Debian 12's packages and build it in
# ./build. Safe to run again: apt-get skips what is installed, CMake rebuilds
# only what changed. Run as root (or with sudo available). valgrind, clang
# and libclang-rt-14-dev (sanitizer and libFuzzer runtimes) serve
# tests/valgrind_cli.sh and tests/sanitize.sh.
set -eu
cd "$(dirname "$0")/.."

packages="build-essential cmake pkg-config libgsl-dev libconfig-dev libcriterion-dev
  python3 python3-numpy python3-scipy python3-astropy python3-pytest python3-matplotlib
  gnuplot-nox
  libopenmpi-dev openmpi-bin
  valgrind clang libclang-rt-14-dev"

if [ "$(id -u)" -eq 0 ]; then as_root=""; else as_root="sudo"; fi
missing=""
for p in $packages; do
  dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed" || missing="$missing $p"
done
if [ -n "$missing" ]; then
  echo "setup: installing$missing" >&2
  $as_root apt-get update -qq
  DEBIAN_FRONTEND=noninteractive $as_root apt-get install -y -qq --no-install-recommends $missing >&2
fi

cmake -S . -B build -DCMAKE_BUILD_TYPE=Release >/dev/null
cmake --build build -j "$(nproc)"
