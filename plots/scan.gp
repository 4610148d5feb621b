# Figures of a `jeansgrow scan` table. Load plots/style.gp first; `out` is
# the stem of the figures (OUT_NAME.png and .svg).
#   one varied key:  each quantity against the key, one curve per redshift
#                    (log axis where the key's range is log-spaced);
#   two varied keys: a map with contours per quantity, one panel per redshift.
# Quantities: scales tables: k_J, k_F, k_half and the masses in one radius
# convention (output.mass_radius); growth tables: delta_b/delta_c at each
# wavenumber; epochs tables: z_star, z_drag, r_drag, z_gas_decoupling.
figure = "the scan figure"
# Several gnuplots may share the pictures (the program starts one per
# usable core, with `part` and `parts`): this one draws pictures number
# part, part + parts, ... of the (figure, format) pairs in their order.
if (!exists("part")) { part = 0 }
if (!exists("parts")) { parts = 1 }
picture = 0
n_axes = int(system(sprintf("awk '/^# scan vary: / { n++ } !/^#/ { exit } END { print n + 0 }' '%s'", table)))
if (n_axes < 1 || n_axes > 2) { print sprintf("plots: %s is not a scan table of one or two varied keys (it varies %d)", table, n_axes); exit status 1 }
axis_key(i) = word(columns, i + 1)
axis_log(i) = system(sprintf("awk -v k='%s' 'index($0, \"# scan vary: \" k \" = \") == 1 && /:log$/ { print 1; exit } !/^#/ { exit }' '%s'", stem_of(axis_key(i)), table)) eq "1"
zcol = col("z")
kcol = col("k")
is_growth = kcol > 0
is_epochs = zcol == 0
full = (mass_radius eq "full_wavelength")
factor = full ? 8.0 : 1.0
radius_text = full ? "radius 2 pi/k" : "radius pi/k"
if (is_epochs) { quantities = "z_star z_drag r_drag z_gas_decoupling"; needed_columns = quantities }
if (!is_epochs && !is_growth) { needed_columns = "z k_J k_F k_half half_found M_J M_F_halfwave M_half"; quantities = "k_J k_F k_half" }
if (is_growth) { needed_columns = "z k b_over_c"; quantities = "b_over_c" }
@need
zs = is_epochs ? "0" : distinct(zcol)
ks = is_growth ? distinct(kcol) : "0"
# The value of quantity q on a row, NaN where it does not exist (k_half not
# found, k_F = 0 without suppression, an absent epoch written as -1).
quantity_at(q) = (q eq "k_half" || q eq "M_half") ? (column(col("half_found")) > 0 ? column(col(q)) : NaN) : \
           (q eq "k_F" || q eq "M_F_halfwave") ? (column(col(q)) > 0 ? column(col(q)) : NaN) : \
           (is_epochs && column(col(q)) == -1) ? NaN : column(col(q))
mass_title(q) = q eq "M_J" ? "Jeans mass" : q eq "M_F_halfwave" ? "filtering mass" : "half-suppression mass"
key_label(i) = sprintf("%s", axis_key(i))

if (n_axes == 1) {
  # Panels: the quantities (and, for a scales table, a second figure of masses).
  set macros
  figures = is_growth ? "suppression" : is_epochs ? "epochs" : "scales masses"
  do for [fig in figures] {
    panel_list = fig eq "masses" ? "M_J M_F_halfwave M_half" : is_growth ? ks : quantities
    n_panels = words(panel_list)
    do for [fmt in formats] {
      picture = picture + 1
      if ((picture - 1) % parts == part) {
      out_base = out
      out = sprintf("%s_%s", out_base, fig)
      @start_figure
      out = out_base
      set multiplot layout (n_panels > 2 ? 2 : 1), (n_panels > 1 ? 2 : 1) title (fig eq "masses" ? sprintf("masses, sphere of %s, against %s", radius_text, axis_key(1)) : sprintf("%s against %s", fig, axis_key(1))) noenhanced
      unset logscale
      if (axis_log(1)) { set logscale x }
      set xlabel key_label(1) noenhanced
      set autoscale xfix
      if (fig ne "epochs" && fig ne "suppression") { set logscale y }
      do for [p = 1:(n_panels > 4 ? 4 : n_panels)] {
        q = is_growth ? "b_over_c" : word(panel_list, p)
        kv = is_growth ? real(word(ks, p)) : 0
        set ylabel (is_growth ? "delta_b / delta_c" : fig eq "masses" ? sprintf("mass [%s]", unit_of(col(q))) : sprintf("%s%s", q, unit_of(col(q)) eq "" ? "" : sprintf(" [%s]", unit_of(col(q))))) noenhanced
        set title (is_growth ? sprintf("k = %g %s", kv, unit_of(kcol)) : fig eq "masses" ? mass_title(q) : q) noenhanced
        if (p == 1 && !is_epochs) { set key outside below center horizontal } else { unset key }
        plot for [i = 1:words(zs)] rows_at(zcol, real(word(zs, i)), kcol, kv, 0) using 1:(quantity_at(q) * (fig eq "masses" ? factor : 1)) \
             with linespoints ls i ps 0.6 title sprintf("z = %g", real(word(zs, i)))
      }
      unset multiplot
      }
    }
  }
}

if (n_axes == 2) {
  # One figure per quantity: a colour map with contour lines, a panel per
  # redshift (at most six), from the rows of that redshift with a blank
  # line wherever the first key changes (gnuplot's grid format).
  map_list = is_growth ? "b_over_c" : quantities
  n_panels = words(zs) > 6 ? 6 : words(zs)
  do for [q in map_list] {
    qc = col(q)
    do for [fmt in formats] {
      picture = picture + 1
      if ((picture - 1) % parts == part) {
      out_base = out
      out = sprintf("%s_map_%s", out_base, q)
      @start_figure
      out = out_base
      set multiplot layout (n_panels > 3 ? 2 : 1), (n_panels > 3 ? 3 : n_panels) title sprintf("%s over %s and %s%s", q, axis_key(1), axis_key(2), is_growth ? sprintf(" at k = %g", real(word(ks, 1))) : "") noenhanced
      set view map
      set pm3d map interpolate 0,0
      set palette gray negative
      set contour base
      set cntrparam levels 6
      set cntrlabel onecolor
      unset key
      unset logscale
      if (axis_log(1)) { set logscale x }
      if (axis_log(2)) { set logscale y }
      set xlabel key_label(1) noenhanced
      set ylabel key_label(2) noenhanced
      set autoscale xfix
      set autoscale yfix
      do for [p = 1:n_panels] {
        zv = real(word(zs, p))
        set title sprintf("z = %g", zv)
        selected = rows_at(zcol, zv, kcol, real(word(ks, 1)), 1)
        splot selected using 1:2:(column(qc) > 0 ? column(qc) : NaN) with pm3d notitle, \
              selected using 1:2:(column(qc) > 0 ? column(qc) : NaN) with lines lc rgb "black" nosurface notitle
      }
      unset multiplot
      }
    }
  }
}
