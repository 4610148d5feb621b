# gnuplot script: baryon-to-CDM ratio against wavenumber at each output
# redshift, from a `jeansgrow growth` table.
#   jeansgrow growth params/reference.cfg -o growth.txt
#   gnuplot -e "table='growth.txt'; out='growth.png'" plots/growth.gp
# Columns (see the README): 1 z, 2 k (1/Mpc, or h/Mpc with output.units =
# "Mpc/h"), 7 b_over_c. Rows are grouped by redshift; a blank line is not
# needed: each redshift is drawn by filtering.
if (!exists("table")) table = 'growth.txt'
if (!exists("out")) out = 'growth.png'
# The axis label takes its unit from the table's column line (the last '#'
# line, "# z<TAB>k[1/Mpc]<TAB>..."), so it follows output.units.
columns = system(sprintf("awk '/^#/ { line = $0; next } { exit } END { print line }' '%s'", table))
unit_of(n) = (c = word(columns, n + 1), c[strstrt(c, "[") + 1 : strlen(c) - 1])
set terminal pngcairo size 900,600 font ",11"
set output out
set datafile separator "\t"
set logscale x
set xlabel sprintf("comoving wavenumber k [%s]", unit_of(2)) noenhanced
set ylabel "{/Symbol d}_b / {/Symbol d}_c"
set yrange [0:1.05]
set grid
set key bottom left title "z"
zs = system(sprintf("grep -v '^#' '%s' | cut -f1 | uniq", table))
plot for [zv in zs] table using 2:(abs($1 - real(zv)) < 1e-9 * (1 + real(zv)) ? $7 : 1/0) \
     with lines lw 2 title sprintf("%g", real(zv))
