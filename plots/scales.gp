# gnuplot script: Jeans, filtering and half-suppression masses against
# redshift, from a `jeansgrow scales` table.
#   jeansgrow scales params/reference.cfg -o scales.txt
#   gnuplot -e "table='scales.txt'; out='scales.png'" plots/scales.gp
# Columns (see the README): 1 z, 5 M_J, 7 M_F, 9 M_half, 10 half_found,
# 14 M_F_integral; masses in Msun, or Msun/h with output.units = "Mpc/h".
if (!exists("table")) table = 'scales.txt'
if (!exists("out")) out = 'scales.png'
# The axis label takes its unit from the table's column line (the last '#'
# line, "# z<TAB>T_gas[K]<TAB>..."), so it follows output.units.
columns = system(sprintf("awk '/^#/ { line = $0; next } { exit } END { print line }' '%s'", table))
unit_of(n) = (c = word(columns, n + 1), c[strstrt(c, "[") + 1 : strlen(c) - 1])
set terminal pngcairo size 900,600 font ",11"
set output out
set datafile separator "\t"
set logscale xy
set xrange [*:*] reverse
set xlabel "redshift z"
set ylabel sprintf("mass [%s]", unit_of(5)) noenhanced
set format y "10^{%L}"
set grid
set key top left
plot table using 1:5 with linespoints lw 2 title "Jeans mass (isothermal)", \
     table using 1:7 with linespoints lw 2 title "filtering mass, solved (2{/Symbol p}/k_F)", \
     table using 1:14 with linespoints dt 2 title "filtering mass, Gnedin-Hui integral", \
     table using 1:($10 > 0 ? $9 : 1/0) with linespoints lw 2 title "half-suppression mass"
