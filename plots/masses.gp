# Jeans, filtering and half-suppression masses against redshift, all in one
# radius convention (output.mass_radius: half_wavelength, the default,
# spheres of radius pi/k; full_wavelength, radius 2 pi/k, 8 times more),
# from a `scales` table. Load plots/style.gp first. With the streaming
# velocity on, the streamed filtering and half-suppression masses
# (M_F_stream, which the table gives with radius 2 pi/k like M_F, and
# M_half_stream, radius pi/k like M_half) are drawn in the same convention.
figure = "the mass figure"
needed_columns = "z M_J M_F_halfwave M_half half_found M_F_integral_halfwave"
@need
full = (mass_radius eq "full_wavelength")
factor = full ? 8.0 : 1.0
radius_text = full ? "radius 2{/Symbol p}/k (full wavelength)" : "radius {/Symbol p}/k (half wavelength)"
flags = col("flags")
stream_twins = "M_F_stream M_F M_half_stream M_half k_F_stream k_F k_half_stream k_half"
@detect_streaming
if (streaming) { needed_columns = "M_F_stream M_half_stream"; @need }
known = " z M_J M_F M_half M_J_adiabatic M_F_integral M_F_integral_adiabatic M_F_halfwave M_F_integral_halfwave M_F_stream M_half_stream "
# Mass columns added later (streaming, heating, ...) are drawn too, in the
# table's own convention, named by their column.
extras = ""
do for [i = 2:words(columns)] {
  s = stem_of(word(columns, i))
  if (s[1:2] eq "M_" && strstrt(known, " ".s." ") == 0) { extras = extras." ".s }
}
do for [fmt in formats] {
  @start_figure
  set logscale xy
  set xrange [*:*] reverse
  set format y "10^{%L}"
  set xlabel "redshift z"
  set ylabel sprintf("mass [%s]", unit_of(col("M_J")))
  set title sprintf("Masses at the mean matter density, sphere of %s", radius_text).(streaming ? sprintf("\n%s", streaming_note) : "")
  @shade_invalid
  plot table using 1:(column(col("M_J")) * factor) with linespoints ls 1 title "Jeans (isothermal)", \
       table using 1:(column(col("M_F_halfwave")) * factor) with linespoints ls 2 title "filtering, solved", \
       table using 1:(column(col("M_F_integral_halfwave")) * factor) with linespoints ls 3 title "filtering, Gnedin-Hui integral", \
       table using 1:(column(col("half_found")) > 0 ? column(col("M_half")) * factor : NaN) with linespoints ls 4 title "half suppression", \
       for [s = 1:streaming] table using 1:(streaming && column(col("M_F_stream")) > 0 ? column(col("M_F_stream")) * factor / 8 : NaN) with linespoints ls 5 title "filtering, streamed", \
       for [s = 1:streaming] table using 1:(streaming && column(col("M_half_stream")) > 0 ? column(col("M_half_stream")) * factor : NaN) with linespoints ls 6 title "half suppression, streamed", \
       for [i = 1:words(extras)] table using 1:(words(extras) > 0 ? column(col(word(extras, i))) : NaN) with linespoints ls 8 title word(extras, i) noenhanced, \
       table using 1:(flags > 0 && column(flags) > 0 ? column(col("M_F_halfwave")) * factor : NaN) with points ls 20 title (flags > 0 ? "flagged (flags column)" : ""), \
       table using 1:(flags > 0 && column(flags) > 0 ? (column(col("half_found")) > 0 ? column(col("M_half")) * factor : NaN) : NaN) with points ls 20 notitle, \
       for [s = 1:streaming] table using 1:(streaming && flags > 0 && column(flags) > 0 && column(col("M_F_stream")) > 0 ? column(col("M_F_stream")) * factor / 8 : NaN) with points ls 20 notitle, \
       for [s = 1:streaming] table using 1:(streaming && flags > 0 && column(flags) > 0 && column(col("M_half_stream")) > 0 ? column(col("M_half_stream")) * factor : NaN) with points ls 20 notitle, \
       NaN with boxes fc rgb "#e4e4e4" fs solid title @shade_key
}
