# gnuplot script: ionisation and gas temperature from a `jeansgrow history` table.
#   jeansgrow history params/reference.cfg -o history.txt
#   gnuplot -e "table='history.txt'; out='history.png'" plots/history.gp
if (!exists("table")) table = 'history.txt'
if (!exists("out")) out = 'history.png'
set terminal pngcairo size 900,700 font ",11"
set output out
set datafile separator "\t"
set multiplot layout 2,1
set logscale xy
set xrange [10:8000] reverse
set xlabel "redshift z"
set grid
set key bottom left
set ylabel "free electrons per H nucleus"
plot table using 1:2 with lines lw 2 title "x_e", \
     table using 1:3 with lines dt 2 title "x_{HII}"
set ylabel "temperature [K]"
set key top right
plot table using 1:6 with lines lw 2 title "T_{gas}", \
     table using 1:7 with lines dt 2 title "T_{rad}"
unset multiplot
