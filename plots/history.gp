# Ionisation and gas temperature against redshift, from a `history` table.
# Load plots/style.gp first. Columns named x_e_... or T_...[K] beyond the
# standard ones (a heated or reionised history) are drawn too. A
# reionised history (thermal.reionisation tanh or tanh+heating) reaches
# x_e ~ 1.16 (helium's electrons too) and T_gas ~ 1e4 K: both axes keep
# room above those, and a dotted line marks the reionisation redshift.
figure = "the history figure"
needed_columns = "z x_e x_HII T_gas T_rad"
@need
x_extras = ""
T_extras = ""
do for [i = 2:words(columns)] {
  s = stem_of(word(columns, i))
  if (s[1:4] eq "x_e_") { x_extras = x_extras." ".s }
  if (s[1:2] eq "T_" && s ne "T_gas" && s ne "T_rad" && unit_of(i - 1) eq "K") { T_extras = T_extras." ".s }
}
reionisation = header_value("thermal.reionisation")
z_reion_text = reionisation eq "tanh" || reionisation eq "tanh+heating" ? header_value("thermal.reionisation_redshift") : ""
z_reion = z_reion_text eq "" ? -1 : real(z_reion_text)
reion_key = z_reion >= 0 ? sprintf("z_{reion} = %g", z_reion) : ""
# Column numbers looked up once, not on every row.
c_x_e = col("x_e")
c_x_HII = col("x_HII")
c_T_gas = col("T_gas")
c_T_rad = col("T_rad")
do for [fmt in formats] {
  @start_figure
  set multiplot layout 2,1 title "Ionisation and temperature of the gas"
  set logscale xy
  set xrange [*:*] reverse
  # 1 + z, so that the history down to z = 0 fits a log axis.
  set key outside right top vertical
  set rmargin at screen 0.74
  set lmargin at screen 0.12
  set format y "10^{%L}"
  set xlabel ""
  set ylabel "free electrons per H nucleus"
  shade_offset = 1
  @shade_invalid
  if (z_reion >= 0) { set arrow 1 from first 1 + z_reion, graph 0 to first 1 + z_reion, graph 1 nohead lc rgb "#606060" dt 3 lw 1.5 } else { unset arrow 1 }
  # Autoscaled, but up to 3 at least: x_e of a reionised gas is above 1.
  set yrange [*:3<*]
  plot table using (1 + $1):(column(c_x_e)) with lines ls 1 title "x_e", \
       table using (1 + $1):(column(c_x_HII)) with lines ls 2 title "x_{HII}", \
       for [e in x_extras] table using (1 + $1):(words(x_extras) > 0 ? column(col(e)) : NaN) with lines ls 3 title e noenhanced, \
       NaN with lines lc rgb "#606060" dt 3 lw 1.5 title reion_key
  set xlabel "1 + z"
  set ylabel "temperature [K]"
  # Up to 1e5 K at least, above a photo-heated gas's ~1e4 K.
  set yrange [*:1e5<*]
  plot table using (1 + $1):(column(c_T_gas)) with lines ls 1 title "T_{gas}", \
       table using (1 + $1):(column(c_T_rad)) with lines ls 2 title "T_{rad}", \
       for [e in T_extras] table using (1 + $1):(words(T_extras) > 0 ? column(col(e)) : NaN) with lines ls 3 title e noenhanced
  unset multiplot
}
