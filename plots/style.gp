# jeansgrow figures: what every figure script shares. Load it first:
#   gnuplot -e "table='results/scales.txt'; out='results/masses'" plots/style.gp plots/masses.gp
# (`jeansgrow plot DIR` does this for every table of DIR.) Each figure is
# written twice, OUT.png for screens and OUT.svg for papers.
#
# The style: black and greys with distinct dash patterns and point shapes,
# so that the curves stay apart on a projector and in grey-scale print;
# legends sit outside the plotted area, where they cannot cover data.
if (!exists("table")) { print "plots: no table given (gnuplot -e \"table='FILE'; out='NAME'\" ...)"; exit status 2 }
if (system(sprintf("test -r '%s' && echo yes", table)) ne "yes") { print sprintf("plots: cannot read %s", table); exit status 2 }
if (!exists("out")) out = table[1:strstrt(table, ".txt") > 0 ? strstrt(table, ".txt") - 1 : strlen(table)]

# The column line is the table's last '#' line ("# z<TAB>T_gas[K]<TAB>...").
columns = system(sprintf("awk '/^#/ { line = $0; next } { exit } END { print line }' '%s'", table))
header = table
stem_of(w) = strstrt(w, "[") > 0 ? w[1:strstrt(w, "[") - 1] : w
# Column number of the column whose name (without its unit) is `stem`; 0 if none.
col(stem) = sum [i = 2:words(columns)] (stem_of(word(columns, i)) eq stem ? i - 1 : 0)
unit_of(n) = (c = word(columns, n + 1), strstrt(c, "[") > 0 ? c[strstrt(c, "[") + 1:strlen(c) - 1] : "")
# A header line's value: the text after "KEY = " on the first '#' line holding it.
header_value(key) = system(sprintf("awk -v k='%s' 'index($0, \"# \" k \" = \") == 1 { sub(/^# [^=]*= /, \"\"); sub(/;$/, \"\"); gsub(/\"/, \"\"); print; exit } !/^#/ { exit }' '%s'", key, table))
# Stop with one clear line when a needed column is missing.
need = "do for [needed in needed_columns] { if (col(needed) == 0) { print sprintf(\"plots: %s has no column '%s' (needed for %s)\", table, needed, figure); exit status 1 } }"

# The thermal model's lowest valid redshift, from the table header (0 if
# the table does not state one); masses in one radius convention.
z_valid_text = system(sprintf("awk '/^# validity: / && match($0, /z >= [0-9.eE+-]+/) { print substr($0, RSTART + 5, RLENGTH - 5); exit } !/^#/ { exit }' '%s'", table))
z_valid = z_valid_text eq "" ? 0 : real(z_valid_text)
mass_radius = header_value("output.mass_radius")
if (mass_radius eq "") mass_radius = "half_wavelength"

# Streaming (the baryon-dark matter relative velocity) is on when the
# header says streaming.rms_velocity_kms > 0, or, for a table whose header
# was cut, when a streamed column differs from its unstreamed twin on some
# row. stream_twins: pairs "STREAMED TWIN", TWIN a column name or a number
# (the streamed power ratios are 1 without streaming).
streaming_rms_text = header_value("streaming.rms_velocity_kms")
streaming_rms = streaming_rms_text eq "" ? 0 : real(streaming_rms_text)
streaming_note = streaming_rms > 0 ? sprintf("streaming velocity: %g km/s rms at z = %s", streaming_rms, header_value("streaming.start_redshift")) : "streaming velocity on"
twin_differs(n, twin) = n > 0 ? system(sprintf("awk -F'\t' '!/^#/ && $%d != %s { print 1; exit }' '%s'", n, twin, table)) eq "1" : 0
twin_expression(w) = col(w) > 0 ? sprintf("$%d", col(w)) : w
detect_streaming = "streaming = streaming_rms > 0; do for [i = 1:words(stream_twins):2] { if (!streaming) { streaming = twin_differs(col(word(stream_twins, i)), twin_expression(word(stream_twins, i + 1))) } }"

set datafile separator "\t"
set grid lc rgb "#d0d0d0"
set border lw 1.5
set key outside below center horizontal maxcols 2 Left reverse samplen 3 spacing 1.1 width 2 box lc rgb "#a0a0a0"
set autoscale xfix
# Line styles 1-8: black and dark greys, each with its own dash and point.
do for [i = 1:8] {
  set style line i lw 2.5 ps 1.2 lc rgb word("#000000 #404040 #000000 #606060 #000000 #404040 #202020 #707070", i) \
      dt i pt int(word("7 5 9 11 13 4 6 8", i))
}
# How a flagged value (outside the stated validity: `flags` column > 0) is
# drawn: an open grey circle over the point.
set style line 20 lc rgb "#808080" pt 6 ps 2.2 lw 1.5
# Below the thermal model's lowest valid redshift the plot is shaded (on a
# reversed z axis: from z_valid to the right edge; shade_offset 1 for 1 + z).
shade_offset = 0
shade_invalid = "if (z_valid > 0) { set obj 1 rect from first z_valid + shade_offset, graph 0 to graph 1, graph 1 behind fc rgb '#e4e4e4' fs solid noborder } else { unset obj 1 }"
shade_key = "(z_valid > 0 ? sprintf('z < %g: no valid thermal model', z_valid) : '')"
formats = "png svg"
# The distinct values of column n, in the order they first appear.
distinct(n) = system(sprintf("awk -F'\t' '!/^#/ && !seen[$%d]++ { print $%d }' '%s'", n, n, table))
# Rows of one redshift only (the growth and scan tables interleave them).
at_z(zcol, zv, v) = abs(column(zcol) - zv) <= 1e-9 * (1 + abs(zv)) ? v : NaN
# z_at[i]: the i-th word of zs as a number, worked out once instead of on
# every row of every curve (`@z_values` after setting zs).
z_values = "array z_at[words(zs)]; do for [i = 1:words(zs)] { z_at[i] = real(word(zs, i)) }"
# The same as a data source, so that lines join consecutive points of that
# redshift (and wavenumber, column kc > 0), with a blank line wherever
# column 1 changes if `blocks` (the grid format of a map).
rows_at(zc, zv, kc, kv, blocks) = sprintf("< awk -F'\t' -v z=%.17g -v k=%.17g -v zc=%d -v kc=%d -v blocks=%d '!/^#/ && (zc == 0 || ($zc - z) ^ 2 <= (1e-9 * (1 + z)) ^ 2) && (kc == 0 || ($kc - k) ^ 2 <= (1e-9 * k) ^ 2) { if (blocks && seen && $1 != last) print \"\"; seen = 1; last = $1; print }' '%s'", zv, kv, zc, kc, blocks, table)
start_figure = "if (fmt eq 'png') { set terminal pngcairo size 1000,650 font 'sans,14' enhanced } else { set terminal svg size 1000,650 font 'sans,14' enhanced dynamic }; set output sprintf('%s.%s', out, fmt)"
