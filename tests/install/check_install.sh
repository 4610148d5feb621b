#!/bin/sh
# Install the build tree into a temporary prefix, then build and run a small
# consumer twice: once through pkg-config (jeansgrow.pc) and once through
# CMake's find_package(jeansgrow). Usage: check_install.sh BUILD_DIR SOURCE_DIR
set -eu
build=$1
src=$2
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
cmake --install "$build" --prefix "$work/prefix" >/dev/null
libdir=$(ls -d "$work"/prefix/lib* | head -n 1)
test -x "$work/prefix/bin/jeansgrow"
"$work/prefix/bin/jeansgrow" --version

export PKG_CONFIG_PATH="$libdir/pkgconfig"
cc -o "$work/consumer_pc" "$src/tests/install/consumer.c" $(pkg-config --cflags --libs jeansgrow)
LD_LIBRARY_PATH="$libdir" "$work/consumer_pc"

cmake -S "$src/tests/install" -B "$work/consumer" -DCMAKE_PREFIX_PATH="$work/prefix" >/dev/null
cmake --build "$work/consumer" >/dev/null
LD_LIBRARY_PATH="$libdir" "$work/consumer/consumer_cmake"
