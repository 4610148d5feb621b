#!/bin/sh
# The figures: every figure of a small `run` (in 1/Mpc and in h/Mpc units,
# with the streaming velocity, with a photo-heated reionisation) and of
# small scans (one varied key, two keys, a growth and an epochs table) is a
# PNG of the size the style asks for and an SVG that parses;
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

# The figures are drawn several at once, one gnuplot per usable core: on a
# single usable core (one at a time) the same files, byte for byte.
first_core=$(taskset -pc $$ 2>/dev/null | sed 's/.*: *//; s/[^0-9].*//')
if command -v taskset >/dev/null 2>&1; then
  mkdir "$work/all_cores"
  cp "$work/Mpc/"*.png "$work/Mpc/"*.svg "$work/all_cores/"
  rm "$work/Mpc/"*.png "$work/Mpc/"*.svg
  taskset -c "$first_core" "$program" plot "$work/Mpc"
  for f in "$work/all_cores/"*; do
    cmp -s "$f" "$work/Mpc/$(basename "$f")" ||
      fail "$(basename "$f") drawn on one core differs from the one drawn on all"
  done
  ls -a "$work/Mpc" | grep -q '^\.jgfig' && fail "a temporary figure was left behind"
fi

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

# gnuplot_value SCRIPT TABLE EXPRESSION: what gnuplot prints for EXPRESSION
# after SCRIPT drew TABLE (GPVAL_DATA_Y_MAX: the highest value of its last
# plot, which must be one the figure means to draw).
gnuplot_value() {
  "$gnuplot" -e "table='$2'; out='$work/value'" "$src/plots/style.gp" "$src/plots/$1.gp" \
    -e "print $3" 2>&1
}
# column_max TABLE EXPRESSION: the largest value of a Python EXPRESSION of the
# row r (a dict by column name without unit) over the table's rows.
column_max() {
  "$python" - "$1" "$2" <<'PY'
import sys
names, rows = None, []
for line in open(sys.argv[1]):
    if line.startswith("#"):
        names = [w.split("[")[0] for w in line[2:].rstrip("\n").split("\t")]
    else:
        rows.append(dict(zip(names, map(float, line.split("\t")))))
print(repr(max(eval(sys.argv[2], {"sqrt": __import__("math").sqrt}, {"r": r}) for r in rows)))
PY
}
# same_value A B: two numbers equal to 1e-9 relative.
same_value() {
  "$python" -c "import sys; a, b = float(sys.argv[1]), float(sys.argv[2]); sys.exit(abs(a - b) > 1e-9 * abs(b))" "$1" "$2"
}

# With the streaming velocity on: every figure, the streamed scales and
# masses beside the unstreamed ones (the masses all with radius pi/k: the
# table gives M_F_stream with 2 pi/k, so drawn unconverted it would top the
# figure), and the suppression figure's second panel, the rms ratio
# |delta_b/delta_c| sqrt(stream_b_power/stream_c_power).
"$program" run "$src/params/reference.cfg" --set streaming.rms_velocity_kms=30.0 \
  --set perturbations.k_count=4 --set 'output.redshifts=[50.0, 10.0]' -o "$work/stream" >/dev/null
for name in history masses scales suppression rates; do check_figure "$work/stream/$name"; done
check_label scales "$work/stream/scales.txt" title \
  "Scales the gas follows; streaming velocity: 30 km/s rms at z = 1020.0"
check_label scales "$work/Mpc/scales.txt" title "Scales the gas follows: smaller k is larger scale"
check_label suppression "$work/stream/growth.txt" title \
  "averaged over v_{bc} (streaming velocity: 30 km/s rms at z = 1020.0)"
drawn=$(gnuplot_value masses "$work/stream/scales.txt" GPVAL_DATA_Y_MAX)
expected=$(column_max "$work/stream/scales.txt" \
  "max(r['M_J'], r['M_F_halfwave'], r['M_F_integral_halfwave'], r['M_half'], r['M_F_stream'] / 8, r['M_half_stream'])")
same_value "$drawn" "$expected" || fail "mass figure with streaming tops at $drawn, the table at $expected"
drawn=$(gnuplot_value suppression "$work/stream/growth.txt" GPVAL_DATA_Y_MAX)
expected=$(column_max "$work/stream/growth.txt" "abs(r['b_over_c']) * sqrt(r['stream_b_power'] / r['stream_c_power'])")
same_value "$drawn" "$expected" || fail "streamed suppression panel tops at $drawn, the table at $expected"
# A header without the streaming key: the streamed columns that differ
# from their twins still say that streaming is on.
grep -v '^# streaming.rms_velocity_kms = ' "$work/stream/scales.txt" >"$work/noheader.txt"
check_label scales "$work/noheader.txt" title "Scales the gas follows; streaming velocity on"

# A reionised, photo-heated history to z = 0: every figure; the temperature
# axis reaches above the photo-heated gas (1e4 K and the table's highest
# T_gas) and the reionisation redshift is marked.
"$program" run "$src/params/reference.cfg" --set 'thermal.reionisation="tanh+heating"' \
  --set perturbations.k_count=4 --set 'output.redshifts=[20.0, 0.0]' -o "$work/heated" >/dev/null
for name in history masses scales suppression rates; do check_figure "$work/heated/$name"; done
top=$(gnuplot_value history "$work/heated/history.txt" GPVAL_Y_MAX)
hottest=$(column_max "$work/heated/history.txt" "r['T_gas']")
"$python" -c "import sys; sys.exit(not float(sys.argv[1]) >= max(1e4, float(sys.argv[2])))" "$top" "$hottest" ||
  fail "history temperature axis ends at $top K, below the gas ($hottest K) or 1e4 K"
case $(gnuplot_value history "$work/heated/history.txt" '"" ; show arrow 1') in
  *"from (8.67000, graph 0, 0)"*) ;;
  *) fail "the heated history figure does not mark 1 + z_reion = 8.67" ;;
esac

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
# A scan's pictures are shared out among one gnuplot per usable core: on a
# single usable core (one gnuplot for all) the same files.
if command -v taskset >/dev/null 2>&1; then
  cp "$work/map.txt" "$work/map1.txt"
  taskset -c "$first_core" "$program" plot "$work/map1.txt"
  for q in k_J k_F k_half; do
    for format in png svg; do
      cmp -s "$work/map_map_$q.$format" "$work/map1_map_$q.$format" ||
        fail "map_map_$q.$format drawn by one gnuplot differs from the one drawn by several"
    done
  done
  ls -a "$work" | grep -q '^\.jgfig' && fail "a temporary scan figure was left behind"
fi
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
echo "plots: run, plot and scan figures rendered and checked (PNG size, SVG parse, labels, streaming, heated history, missing columns, no gnuplot)"
