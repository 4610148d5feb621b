# Jeans, filtering and half-suppression wavenumbers against redshift, from
# a `scales` table. Load plots/style.gp first.
figure = "the wavenumber figure"
needed_columns = "z k_J k_F k_half half_found k_F_integral"
@need
flags = col("flags")
do for [fmt in formats] {
  @start_figure
  set logscale xy
  set xrange [*:*] reverse
  set xlabel "redshift z"
  set ylabel sprintf("comoving wavenumber [%s]", unit_of(col("k_J"))) noenhanced
  set title "Scales the gas follows: smaller k is larger scale"
  @shade_invalid
  plot table using 1:(column(col("k_J"))) with linespoints ls 1 title "k_J (isothermal Jeans)", \
       table using 1:(column(col("k_F")) > 0 ? column(col("k_F")) : NaN) with linespoints ls 2 title "k_F, solved", \
       table using 1:(column(col("k_F_integral"))) with linespoints ls 3 title "k_F, Gnedin-Hui integral", \
       table using 1:(column(col("half_found")) > 0 ? column(col("k_half")) : NaN) with linespoints ls 4 title "k_{1/2}, half suppression", \
       table using 1:(flags > 0 && column(flags) > 0 && column(col("k_F")) > 0 ? column(col("k_F")) : NaN) with points ls 20 title (flags > 0 ? "outside the stated validity (flags column)" : ""), \
       table using 1:(flags > 0 && column(flags) > 0 && column(col("half_found")) > 0 ? column(col("k_half")) : NaN) with points ls 20 notitle, \
       NaN with boxes fc rgb "#e4e4e4" fs solid title @shade_key
}
