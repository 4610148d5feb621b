#!/bin/sh
# Regenerates the reference figures the README shows (docs/figures/*.png):
# the run on params/reference.cfg, the same with the streaming velocity
# (30 km/s rms) and with a photo-heated reionisation, and a baryon-density
# scan of it.
# Usage: plots/reference_figures.sh [JEANSGROW]   (default: build/jeansgrow)
set -eu
cd "$(dirname "$0")/.."
program=${1:-build/jeansgrow}
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
"$program" run params/reference.cfg -o "$work/run" >/dev/null
"$program" run params/reference.cfg --set streaming.rms_velocity_kms=30.0 \
  --set perturbations.k_count=48 --set 'output.redshifts=[200.0, 50.0, 20.0, 10.0]' \
  -o "$work/streaming" >/dev/null
"$program" run params/reference.cfg --set 'thermal.reionisation="tanh+heating"' \
  --set perturbations.k_count=48 --set 'output.redshifts=[200.0, 20.0, 6.0, 0.0]' \
  -o "$work/heated" >/dev/null
"$program" scan params/reference.cfg --vary cosmology.baryon_density_h2=0.005:0.05:24:log \
  --set 'output.redshifts=[200.0, 50.0, 20.0, 10.0]' -o "$work/baryons.txt" 2>/dev/null
mkdir -p docs/figures
for name in history masses scales suppression rates; do
  cp "$work/run/$name.png" "docs/figures/$name.png"
done
for name in masses suppression; do
  cp "$work/streaming/$name.png" "docs/figures/streaming_$name.png"
done
cp "$work/heated/history.png" docs/figures/heated_history.png
cp "$work/baryons_masses.png" docs/figures/baryon_scan_masses.png
cp "$work/baryons_scales.png" docs/figures/baryon_scan_scales.png
echo "reference figures written to docs/figures/"
