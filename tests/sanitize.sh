#!/bin/sh
# The whole CTest suite again, with everything (library, program, tests)
# built with AddressSanitizer + UndefinedBehaviorSanitizer, leak detection
# on, in ./build-asan. With clang the libFuzzer target is built too and
# CTest runs it for a short fixed budget (fuzz_params_smoke).
#
#   tests/sanitize.sh            # after tests/setup.sh (packages installed)
#
# Every sanitizer report is fatal (-fno-sanitize-recover=all, abort_on_error)
# and is also written to build-asan/sanitizer-logs/; the script fails if any
# report was written, even one from a child process whose test would not
# have noticed (Criterion runs each test in its own process; the CLI tests
# run the program).
set -eu
cd "$(dirname "$0")/.."
root=$(pwd)
build=build-asan

if command -v clang >/dev/null 2>&1; then
  cc=clang
  fuzz=ON
else
  cc=cc
  fuzz=OFF
  echo "sanitize: clang not found; building with $cc, without the fuzz target" >&2
fi

# Without MPI: Open MPI does not free its own allocations at MPI_Finalize
# and loads its components with dlopen, so LeakSanitizer reports leaks in
# code that is not ours and cannot be told apart by name. The MPI path is
# tested in the normal build.
CC=$cc cmake -S . -B "$build" -DCMAKE_BUILD_TYPE=RelWithDebInfo -DJG_SANITIZE=ON \
  -DJG_FUZZ=$fuzz -DJG_WITH_MPI=OFF >/dev/null
cmake --build "$build" -j "$(nproc)"

logs=$root/$build/sanitizer-logs
rm -rf "$logs"
mkdir -p "$logs"
export ASAN_OPTIONS="detect_leaks=1:abort_on_error=1:halt_on_error=1:strict_string_checks=1:detect_stack_use_after_return=1:check_initialization_order=1:log_path=$logs/asan"
export UBSAN_OPTIONS="print_stacktrace=1:halt_on_error=1:abort_on_error=1:log_path=$logs/ubsan"
export LSAN_OPTIONS="suppressions=$root/tests/lsan.supp:print_suppressions=0"

status=0
ctest --test-dir "$build" --output-on-failure || status=$?

if [ -n "$(ls -A "$logs")" ]; then
  echo "sanitize: sanitizer reports were written:" >&2
  for f in "$logs"/*; do
    echo "---- $f" >&2
    cat "$f" >&2
  done
  [ "$status" -ne 0 ] || status=1
fi
exit "$status"
