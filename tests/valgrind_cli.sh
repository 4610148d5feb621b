#!/bin/sh
# The command-line program under valgrind memcheck: good runs on the
# reference file and a few bad inputs. Each run must end with its expected
# exit status and with no memcheck error and no leak of any kind (still
# reachable included: the program frees everything it allocates).
#
#   tests/valgrind_cli.sh PROGRAM SOURCE_DIR
#
# Registered in CTest as valgrind_cli when valgrind is installed, in gcc
# builds without sanitizers (see tests/CMakeLists.txt for why).
set -u
program=$1
src=$2
ref=$src/params/reference.cfg
corpus=$src/tests/fuzz/corpus_params
work=$(mktemp -d "${TMPDIR:-/tmp}/jg_valgrind.XXXXXX")
trap 'rm -rf "$work"' EXIT

# memcheck's own failures exit 99, distinct from the program's 0, 1 and 2.
vg_status=99
passed=0
failed=0

# check NAME EXPECTED_STATUS ARGS... (standard output to $stdout_to if set;
# the tool and its options from $tool_options)
stdout_to=
memcheck_options="--leak-check=full --show-leak-kinds=all --errors-for-leak-kinds=all"
tool_options=$memcheck_options
check() {
  name=$1
  expected=$2
  shift 2
  log=$work/$name.valgrind
  # shellcheck disable=SC2086 # the options are words
  "${VALGRIND:-valgrind}" --quiet --error-exitcode=$vg_status $tool_options --log-file="$log" \
    "$program" "$@" \
    >"${stdout_to:-$work/$name.out}" 2>"$work/$name.err" </dev/null
  status=$?
  if [ "$status" -eq "$expected" ] && [ ! -s "$log" ]; then
    passed=$((passed + 1))
    echo "ok     $name (exit $status)"
  else
    failed=$((failed + 1))
    echo "FAILED $name: exit $status, expected $expected"
    sed 's/^/  stderr: /' "$work/$name.err"
    sed 's/^/  valgrind: /' "$log"
  fi
}

check epochs_reference 0 epochs "$ref"
check history_reference 0 history "$ref" -o "$work/history.txt"
# Replacing an existing table goes through the same atomic rename.
check history_replaces_file 0 history "$ref" --set output.history_rows=50 -o "$work/history.txt"
check epochs_with_overrides 0 epochs "$ref" --set thermal.grid_points=1000 \
  --set 'output.redshifts=[900.0, 30.0]' --set cosmology.hubble_h=0.7
check keys 0 keys
check help 0 history --help

check missing_file 2 epochs "$work/no_such.cfg"
check syntax_error 2 epochs "$corpus/bad_syntax_double_equals.cfg"
check unknown_key 2 epochs "$corpus/bad_unknown_key.cfg"
check string_for_number 2 epochs "$corpus/bad_string_for_number.cfg"
check redshift_above_start 2 history "$corpus/bad_redshift_above_start.cfg"
check no_big_bang 2 history "$corpus/no_big_bang.cfg" -o "$work/never.txt"
check bad_override 2 history "$ref" --set 'thermal.grid_points=[1, 2]'
check unwritable_output 2 history "$ref" -o /nonexistent/dir/file
# A full disk, through standard output on /dev/full (never through -o: a
# regression of the in-place write would replace the device as root).
stdout_to=/dev/full
check full_stdout 1 history "$ref" --set output.history_rows=50
stdout_to=

# run's second thread computes the growth grid beside this one, which joins
# it after the scales, and both format its table's chunks: helgrind checks
# that the two threads share nothing without an ordering between them
# (with two usable cores).
tool_options=--tool=helgrind
check run_two_threads 0 run "$ref" --no-figures --set perturbations.k_count=16 -o "$work/run"
tool_options=$memcheck_options

if [ -e "$work/never.txt" ]; then
  failed=$((failed + 1))
  echo "FAILED no_big_bang: an output file was written"
fi
echo "valgrind_cli: $passed passed, $failed failed"
[ "$failed" -eq 0 ]
