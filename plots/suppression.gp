# delta_b/delta_c against wavenumber at each output redshift, from a
# `growth` table, with k_F and k_1/2 of the `scales` table of the same run
# marked (variable `scales`, default: scales.txt beside the table): k_1/2
# where the curve reaches half its k -> 0 value, k_F at 1/e of it (where a
# Gaussian filter exp(-k^2/k_F^2) puts it). Load plots/style.gp first.
# With the streaming velocity on, a second panel below, on the same axes,
# draws what the streamed scales describe: the rms baryon over the rms
# dark-matter contrast, averaged over the direction and the Maxwellian of
# v_bc, |delta_b/delta_c| sqrt(stream_b_power / stream_c_power), with
# k_F_stream and k_half_stream marked the same way (k_half_stream is
# where this curve is half its k -> 0 value).
figure = "the suppression figure"
needed_columns = "z k b_over_c"
@need
if (!exists("scales")) scales = system(sprintf("dirname '%s'", table))."/scales.txt"
have_scales = system(sprintf("test -r '%s' && echo yes", scales)) eq "yes"
if (have_scales) {
  scales_columns = system(sprintf("awk '/^#/ { line = $0; next } { exit } END { print line }' '%s'", scales))
  scol(stem) = sum [i = 2:words(scales_columns)] (stem_of(word(scales_columns, i)) eq stem ? i - 1 : 0)
  do for [needed in "z k_F k_half half_found b_over_c_large"] {
    if (scol(needed) == 0) { print sprintf("plots: %s has no column '%s' (needed for %s)", scales, needed, figure); exit status 1 }
  }
}
stream_twins = "stream_b_power 1 stream_c_power 1 stream_b_power_rms 1 stream_b_power_patch 1"
@detect_streaming
if (streaming) { needed_columns = "stream_b_power stream_c_power"; @need }
if (streaming && have_scales) {
  do for [needed in "k_F_stream k_half_stream"] {
    if (scol(needed) == 0) { print sprintf("plots: %s has no column '%s' (needed for %s)", scales, needed, figure); exit status 1 }
  }
}
zs = distinct(1)
flags = col("flags")
# Column numbers looked up once, not on every row of every curve.
c_b_over_c = col("b_over_c")
c_stream_b = col("stream_b_power")
c_stream_c = col("stream_c_power")
@z_values
streamed_ratio = "abs(column(c_b_over_c)) * sqrt(column(c_stream_b) / column(c_stream_c))"
do for [fmt in formats] {
  @start_figure
  set logscale x
  set xlabel sprintf("comoving wavenumber k [%s]", unit_of(col("k"))) noenhanced
  set ylabel "{/Symbol d}_b / {/Symbol d}_c"
  set yrange [*:*]
  set key title "z"
  if (streaming) {
    set multiplot layout 2,1 title "Baryons behind the dark matter; marks: k_F (open), k_{1/2} (filled)"
    set key outside right top vertical
    set lmargin at screen 0.1
    set rmargin at screen 0.74
    set title "without streaming"
    set xlabel ""
  } else {
    set title "Baryons behind the dark matter; marks: k_F (open), k_{1/2} (filled)"
  }
  plot for [i = 1:words(zs)] table using 2:(at_z(1, z_at[i], column(c_b_over_c))) with lines ls i title sprintf("%g", real(word(zs, i))), \
       for [i = 1:(have_scales ? words(zs) : 0)] scales using (at_z(1, z_at[i], column(scol("k_half")))):(column(scol("half_found")) > 0 ? 0.5 * column(scol("b_over_c_large")) : NaN) with points ls i pt 7 ps 1.6 notitle, \
       for [i = 1:(have_scales ? words(zs) : 0)] scales using (at_z(1, z_at[i], column(scol("k_F")) > 0 ? column(scol("k_F")) : NaN)):(exp(-1) * column(scol("b_over_c_large"))) with points ls i pt 6 ps 1.6 notitle, \
       table using 2:(flags > 0 && column(flags) > 0 ? column(c_b_over_c) : NaN) every 8 with points ls 20 title (flags > 0 && !streaming ? "flagged (flags column)" : "")
  if (streaming) {
    # The same axes as above, so that the two panels compare at a glance.
    set yrange [GPVAL_Y_MIN < 0 ? GPVAL_Y_MIN : 0:GPVAL_Y_MAX]
    set title sprintf("averaged over v_{bc} (%s)", streaming_note)
    set key notitle
    set xlabel sprintf("comoving wavenumber k [%s]", unit_of(col("k"))) noenhanced
    set ylabel "rms {/Symbol d}_b / rms {/Symbol d}_c"
    plot for [i = 1:words(zs)] table using 2:(at_z(1, z_at[i], @streamed_ratio)) with lines ls i notitle, \
         for [i = 1:(have_scales ? words(zs) : 0)] scales using (at_z(1, z_at[i], column(scol("k_half_stream")) > 0 ? column(scol("k_half_stream")) : NaN)):(0.5 * column(scol("b_over_c_large"))) with points ls i pt 7 ps 1.6 notitle, \
         for [i = 1:(have_scales ? words(zs) : 0)] scales using (at_z(1, z_at[i], column(scol("k_F_stream")) > 0 ? column(scol("k_F_stream")) : NaN)):(exp(-1) * column(scol("b_over_c_large"))) with points ls i pt 6 ps 1.6 notitle, \
         table using 2:(flags > 0 && column(flags) > 0 ? @streamed_ratio : NaN) every 8 with points ls 20 title (flags > 0 ? "flagged" : "")
    unset multiplot
  }
}
