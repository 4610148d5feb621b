# Jeans, filtering and half-suppression wavenumbers against redshift, from
# a `scales` table. Load plots/style.gp first. With the streaming velocity
# on, the streamed k_F and k_1/2 (k_F_stream, k_half_stream) are drawn too.
figure = "the wavenumber figure"
needed_columns = "z k_J k_F k_half half_found k_F_integral"
@need
flags = col("flags")
stream_twins = "k_F_stream k_F k_half_stream k_half M_F_stream M_F M_half_stream M_half"
@detect_streaming
if (streaming) { needed_columns = "k_F_stream k_half_stream"; @need }
do for [fmt in formats] {
  @start_figure
  set logscale xy
  set xrange [*:*] reverse
  set xlabel "redshift z"
  set ylabel sprintf("comoving wavenumber [%s]", unit_of(col("k_J"))) noenhanced
  set title streaming ? sprintf("Scales the gas follows; %s", streaming_note) : "Scales the gas follows: smaller k is larger scale"
  @shade_invalid
  plot table using 1:(column(col("k_J"))) with linespoints ls 1 title "k_J (isothermal Jeans)", \
       table using 1:(column(col("k_F")) > 0 ? column(col("k_F")) : NaN) with linespoints ls 2 title "k_F, solved", \
       table using 1:(column(col("k_F_integral"))) with linespoints ls 3 title "k_F, Gnedin-Hui integral", \
       table using 1:(column(col("half_found")) > 0 ? column(col("k_half")) : NaN) with linespoints ls 4 title "k_{1/2}, half suppression", \
       for [s = 1:streaming] table using 1:(streaming && column(col("k_F_stream")) > 0 ? column(col("k_F_stream")) : NaN) with linespoints ls 5 title "k_F, streamed", \
       for [s = 1:streaming] table using 1:(streaming && column(col("k_half_stream")) > 0 ? column(col("k_half_stream")) : NaN) with linespoints ls 6 title "k_{1/2}, streamed", \
       table using 1:(flags > 0 && column(flags) > 0 && column(col("k_F")) > 0 ? column(col("k_F")) : NaN) with points ls 20 title (flags > 0 ? "flagged (flags column)" : ""), \
       table using 1:(flags > 0 && column(flags) > 0 && column(col("half_found")) > 0 ? column(col("k_half")) : NaN) with points ls 20 notitle, \
       for [s = 1:streaming] table using 1:(streaming && flags > 0 && column(flags) > 0 && column(col("k_F_stream")) > 0 ? column(col("k_F_stream")) : NaN) with points ls 20 notitle, \
       for [s = 1:streaming] table using 1:(streaming && flags > 0 && column(flags) > 0 && column(col("k_half_stream")) > 0 ? column(col("k_half_stream")) : NaN) with points ls 20 notitle, \
       NaN with boxes fc rgb "#e4e4e4" fs solid title @shade_key
}
