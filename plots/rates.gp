# Logarithmic growth rates d ln delta / d ln a against wavenumber at each
# output redshift, from a `growth` table: baryons (lines) and CDM (thin
# lines of the same pattern). Load plots/style.gp first.
figure = "the growth-rate figure"
needed_columns = "z k rate_b rate_c"
@need
zs = distinct(1)
# Column numbers looked up once, not on every row of every curve.
c_rate_b = col("rate_b")
c_rate_c = col("rate_c")
@z_values
do for [fmt in formats] {
  @start_figure
  set logscale x
  set xlabel sprintf("comoving wavenumber k [%s]", unit_of(col("k"))) noenhanced
  set ylabel "d ln {/Symbol d} / d ln a"
  set title "Growth rates: baryons (thick), dark matter (thin)"
  set key title "z"
  plot for [i = 1:words(zs)] table using 2:(at_z(1, z_at[i], column(c_rate_b))) with lines ls i title sprintf("%g", real(word(zs, i))), \
       for [i = 1:words(zs)] table using 2:(at_z(1, z_at[i], column(c_rate_c))) with lines ls i lw 1 notitle
}
