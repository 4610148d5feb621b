#!/bin/sh
# Render every gnuplot script of plots/ from the tables of a small `run` and
# check that each wrote a non-empty PNG. Usage: plots_render.sh JEANSGROW SOURCE_DIR GNUPLOT
set -eu
program=$1
src=$2
gnuplot=$3
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
"$program" run "$src/params/reference.cfg" --set perturbations.k_count=16 -o "$work" >/dev/null
for name in history scales growth; do
  "$gnuplot" -e "table='$work/$name.txt'; out='$work/$name.png'" "$src/plots/$name.gp"
  test -s "$work/$name.png"
  head -c 8 "$work/$name.png" | od -An -c | grep -q "P   N   G"
done
echo "plots: history, scales and growth rendered"
