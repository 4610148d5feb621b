#!/bin/sh
# The figures: every figure of a small `run` (in 1/Mpc and in h/Mpc units)
# and of small scans (one varied key, two keys, a growth and an epochs
# table) is a PNG of the size the style asks for and an SVG that parses;
# the axes name the units of their table; `jeansgrow plot` draws them again;
# a table without a needed column stops the script with one clear line;
# without gnuplot `run` still writes its tables and says how to get them.
# Usage: plots_render.sh JEANSGROW SOURCE_DIR GNUPLOT
set -eu
program=$1
src=$2
gnuplot=$3
python=/usr/bin/python3
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
fail() { echo "plots: $*" >&2; exit 1; }

# check_figure STEM: STEM.png is a PNG of 1000 x 650 pixels and a sensible
# size, STEM.svg an SVG document an XML parser reads.
check_figure() {
  test -s "$1.png" || fail "$1.png missing"
  test -s "$1.svg" || fail "$1.svg missing"
  "$python" - "$1" <<'PY' || exit 1
import os, struct, sys
import xml.etree.ElementTree as ET
stem = sys.argv[1]
with open(stem + ".png", "rb") as f:
    head = f.read(24)
if head[:8] != b"\x89PNG\r\n\x1a\n" or head[12:16] != b"IHDR":
    sys.exit("plots: %s.png is not a PNG" % stem)
width, height = struct.unpack(">II", head[16:24])
size = os.path.getsize(stem + ".png")
if (width, height) != (1000, 650) or not 5000 < size < 400000:
    sys.exit("plots: %s.png is %d x %d pixels, %d bytes" % (stem, width, height, size))
root = ET.parse(stem + ".svg").getroot()
if not root.tag.endswith("svg") or len(root.iter().__next__()) == 0:
    sys.exit("plots: %s.svg is not an SVG drawing" % stem)
PY
}

for units in Mpc Mpc/h; do
  dir="$work/$(echo "$units" | tr / _)"
  "$program" run "$src/params/reference.cfg" --set perturbations.k_count=16 \
    --set "output.units=\"$units\"" -o "$dir" >"$work/summary.txt"
  grep -q "figures: history, masses, scales, suppression, rates" "$work/summary.txt" ||
    fail "the run summary does not name its figures: $(cat "$work/summary.txt")"
  for name in history masses scales suppression rates; do
    check_figure "$dir/$name"
  done
done
ls -a "$work/Mpc" | grep -q '^\.jgfig' && fail "a temporary figure was left behind"

# `plot DIR` draws the figures again from the tables alone.
rm "$work/Mpc/"*.png "$work/Mpc/"*.svg
"$program" plot "$work/Mpc"
for name in history masses scales suppression rates; do check_figure "$work/Mpc/$name"; done

# check_label SCRIPT TABLE AXIS LABEL: gnuplot's `show AXIS` after SCRIPT
# drew TABLE must print exactly LABEL.
check_label() {
  shown=$("$gnuplot" -e "table='$2'; out='$work/label'" "$src/plots/style.gp" "$src/plots/$1.gp" \
    -e "show $3" 2>&1)
  case $shown in
    *"$3 is \"$4\""*) ;;
    *) fail "$1.gp on $2: $3 should be \"$4\"; gnuplot shows: $shown" ;;
  esac
}
check_label masses "$work/Mpc/scales.txt" ylabel "mass [Msun]"
check_label masses "$work/Mpc_h/scales.txt" ylabel "mass [Msun/h]"
check_label scales "$work/Mpc_h/scales.txt" ylabel "comoving wavenumber [h/Mpc]"
check_label suppression "$work/Mpc/growth.txt" xlabel "comoving wavenumber k [1/Mpc]"
check_label rates "$work/Mpc_h/growth.txt" xlabel "comoving wavenumber k [h/Mpc]"
# The mass figure states its radius convention, and follows output.mass_radius.
check_label masses "$work/Mpc/scales.txt" title \
  "Masses at the mean matter density, sphere of radius {/Symbol p}/k (half wavelength)"
sed 's/^# output.mass_radius = .*/# output.mass_radius = "full_wavelength";/' \
  "$work/Mpc/scales.txt" >"$work/full.txt"
check_label masses "$work/full.txt" title \
  "Masses at the mean matter density, sphere of radius 2{/Symbol p}/k (full wavelength)"

# A table that lacks a column the figure needs: one line naming both.
awk -F'\t' 'BEGIN { OFS = "\t" } /^#/ && !/^# z\t/ { print; next } { NF = 8; print }' \
  "$work/Mpc/scales.txt" >"$work/cut.txt"
if "$gnuplot" -e "table='$work/cut.txt'; out='$work/cut'" "$src/plots/style.gp" \
     "$src/plots/masses.gp" 2>"$work/cut.err"; then
  fail "masses.gp drew a table without M_F_halfwave"
fi
grep -q "plots: $work/cut.txt has no column 'M_F_halfwave' (needed for the mass figure)" "$work/cut.err" ||
  fail "masses.gp on a cut table said: $(cat "$work/cut.err")"
if "$program" plot "$work/cut.txt" 2>"$work/cut.err"; then fail "plot drew a cut table"; fi
grep -q "has no column 'M_F_halfwave'" "$work/cut.err" || fail "plot on a cut table said: $(cat "$work/cut.err")"

# Scans: figures written when the table is complete, named after it.
coarse="thermal.grid_points=1000"
"$program" scan "$src/params/reference.cfg" --vary cosmology.baryon_density_h2=0.01:0.04:4:log \
  --set "$coarse" --set 'output.redshifts=[200.0, 20.0]' -o "$work/baryons.txt" 2>/dev/null
check_figure "$work/baryons_scales"
check_figure "$work/baryons_masses"
"$program" scan "$src/params/reference.cfg" --vary cosmology.baryon_density_h2=0.01:0.04:3:log \
  --vary cosmology.cdm_density_h2=0.1:0.14:3 --set "$coarse" --set 'output.redshifts=[20.0]' \
  -o "$work/map.txt" 2>/dev/null
for q in k_J k_F k_half; do check_figure "$work/map_map_$q"; done
"$program" scan "$src/params/reference.cfg" --table growth \
  --vary 'perturbations.sound_speed=[isothermal, adiabatic]' --set "$coarse" \
  --set 'output.redshifts=[20.0]' --set 'perturbations.k_values=[100.0, 1000.0]' \
  -o "$work/gs.txt" 2>/dev/null
check_figure "$work/gs_suppression"
"$program" scan "$src/params/reference.cfg" --table epochs --vary cosmology.hubble_h=0.6:0.8:3 \
  --set "$coarse" -o "$work/es.txt" 2>/dev/null
check_figure "$work/es_epochs"
rm "$work/baryons_scales.png"
"$program" plot "$work/baryons.txt"
check_figure "$work/baryons_scales"

# Without gnuplot: the tables, and one line saying how to get the figures.
PATH=/nonexistent "$program" run "$src/params/reference.cfg" --set perturbations.k_count=4 \
  -o "$work/bare" >"$work/bare.txt"
grep -q "figures: none (gnuplot is not installed; on Debian: apt-get install gnuplot-nox, then \
jeansgrow plot $work/bare)" "$work/bare.txt" || fail "no hint without gnuplot: $(cat "$work/bare.txt")"
test -s "$work/bare/scales.txt" || fail "no tables without gnuplot"
ls "$work/bare" | grep -q '\.png$' && fail "figures without gnuplot?"
if PATH=/nonexistent "$program" plot "$work/bare" 2>"$work/bare.err"; then
  fail "plot without gnuplot succeeded"
fi
grep -q "gnuplot is not installed" "$work/bare.err" || fail "plot without gnuplot: $(cat "$work/bare.err")"
echo "plots: run, plot and scan figures rendered and checked (PNG size, SVG parse, labels, missing columns, no gnuplot)"
