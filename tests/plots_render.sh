#!/bin/sh
# Render every gnuplot script of plots/ from the tables of a small `run`,
# once per output.units choice, and check that each wrote a non-empty PNG
# and that the axes carrying a unit name the unit of the table they draw.
# Usage: plots_render.sh JEANSGROW SOURCE_DIR GNUPLOT
set -eu
program=$1
src=$2
gnuplot=$3
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
for units in Mpc Mpc/h; do
  dir="$work/$(echo "$units" | tr / _)"
  "$program" run "$src/params/reference.cfg" --set perturbations.k_count=16 \
    --set "output.units=\"$units\"" -o "$dir" >/dev/null
  for name in history scales growth; do
    "$gnuplot" -e "table='$dir/$name.txt'; out='$dir/$name.png'" "$src/plots/$name.gp"
    test -s "$dir/$name.png"
    head -c 8 "$dir/$name.png" | od -An -c | grep -q "P   N   G"
  done
done

# check_label SCRIPT TABLE AXIS LABEL: gnuplot's `show AXIS` after SCRIPT
# drew TABLE must print exactly LABEL.
check_label() {
  shown=$("$gnuplot" -e "table='$2'; out='$work/label.png'" "$src/plots/$1.gp" -e "show $3" 2>&1)
  case $shown in
    *"$3 is \"$4\""*) ;;
    *) echo "plots: $1.gp on $2: $3 should be \"$4\"; gnuplot shows: $shown" >&2; exit 1 ;;
  esac
}
check_label scales "$work/Mpc/scales.txt" ylabel "mass [Msun]"
check_label scales "$work/Mpc_h/scales.txt" ylabel "mass [Msun/h]"
check_label growth "$work/Mpc/growth.txt" xlabel "comoving wavenumber k [1/Mpc]"
check_label growth "$work/Mpc_h/growth.txt" xlabel "comoving wavenumber k [h/Mpc]"
echo "plots: history, scales and growth rendered in 1/Mpc and h/Mpc units, labels checked"
