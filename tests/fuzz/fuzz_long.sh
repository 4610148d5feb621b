#!/bin/sh
# A longer fuzz run of the parameter loader than CI's 30-second smoke test.
#
#   tests/fuzz/fuzz_long.sh [SECONDS]      # default 3600
#
# Builds the sanitized libFuzzer target in ./build-asan (as tests/sanitize.sh
# does), keeps what the fuzzer learns in build-asan/fuzz-corpus (the seeds in
# tests/fuzz/corpus_params are only read) and writes any crashing input to
# build-asan/fuzz-artifacts/. Copy a crash into tests/fuzz/regressions/ with
# a line in its README, then fix the bug: test_fuzz_replay replays it.
set -eu
cd "$(dirname "$0")/../.."
seconds=${1:-3600}
build=build-asan
CC=clang cmake -S . -B "$build" -DCMAKE_BUILD_TYPE=RelWithDebInfo -DJG_SANITIZE=ON \
  -DJG_FUZZ=ON -DJG_WITH_MPI=OFF >/dev/null
cmake --build "$build" -j "$(nproc)" --target fuzz_params
mkdir -p "$build/fuzz-corpus" "$build/fuzz-artifacts"
export ASAN_OPTIONS="detect_leaks=1:abort_on_error=1"
export LSAN_OPTIONS="suppressions=$(pwd)/tests/lsan.supp:print_suppressions=0"
exec "$build/tests/fuzz/fuzz_params" -max_total_time="$seconds" -timeout=10 \
  -rss_limit_mb=2048 -print_final_stats=1 -dict=tests/fuzz/params.dict \
  -artifact_prefix="$build/fuzz-artifacts/" "$build/fuzz-corpus" tests/fuzz/corpus_params
