/*
 * Our growth table against another code's (see include/jeansgrow/compare.h).
 *
 * Both tables are read through column maps (params.h) by the reader that
 * reads start tables, so a malformed table is refused the same way, naming
 * its file and line. Ours is found by its column names (z, k[1/Mpc] or
 * k[h/Mpc], delta_c, delta_b) and its header's h. Rows are grouped by
 * redshift; ours are interpolated in ln k at each reference k with GSL's
 * Steffen method (monotone, no overshoot between rows; linear for two
 * rows), as the start table is.
 */
#include "jeansgrow/compare.h"

#include <errno.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_interp.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "jeansgrow/table.h"
#include "../base/alloc.h" /* last: test builds route allocations through it */

/* Two redshifts this close (relative to 1 + z) are the same output. */
#define CMP_Z_MATCH 1e-6
/* A k this close (relative) to the end of our grid is that end. */
#define CMP_K_SNAP 1e-9

typedef struct point {
  double z, k, dc, db, bc; /* k in 1/Mpc */
  int line;
} point;

typedef struct point_list {
  point *p;
  int n, cap;
  double k_factor; /* table unit -> 1/Mpc */
  int has_deltas;  /* delta_c and delta_b given (else b_over_c) */
} point_list;

static jg_status collect(void *user, const char *path, int line_no, const double *v,
                         jg_error *err) {
  point_list *l = user;
  if (l->n == l->cap) {
    int cap = l->cap ? 2 * l->cap : 256;
    point *bigger = realloc(l->p, sizeof *bigger * (size_t)cap);
    if (!bigger) return JG_FAIL(err, JG_ENOMEM, "%s: out of memory for the table", path);
    l->p = bigger;
    l->cap = cap;
  }
  point *p = &l->p[l->n];
  p->z = v[JG_COLUMN_Z];
  p->k = v[JG_COLUMN_K] * l->k_factor;
  p->dc = v[JG_COLUMN_DELTA_C];
  p->db = v[JG_COLUMN_DELTA_B];
  p->bc = l->has_deltas ? p->db / p->dc : v[JG_COLUMN_B_OVER_C];
  p->line = line_no;
  if (!(p->k > 0.0))
    return JG_FAIL(err, JG_ECONFIG, "%s:%d: k = %g must be > 0", path, line_no, v[JG_COLUMN_K]);
  if (!(p->z > -1.0))
    return JG_FAIL(err, JG_ECONFIG, "%s:%d: z = %g must be > -1", path, line_no, p->z);
  if (!isfinite(p->bc) || (l->has_deltas && p->dc == 0.0))
    return JG_FAIL(err, JG_ECONFIG, "%s:%d: delta_c is 0 (delta_b/delta_c is undefined)", path,
                   line_no);
  l->n++;
  return JG_OK;
}

/* Highest z first, then k increasing. */
static int by_z_then_k(const void *a, const void *b) {
  const point *p = a, *q = b;
  if (p->z != q->z) return p->z > q->z ? -1 : 1;
  if (p->k != q->k) return p->k < q->k ? -1 : 1;
  return p->line - q->line;
}

static jg_status sort_checked(point_list *l, const char *path, jg_error *err) {
  qsort(l->p, (size_t)l->n, sizeof *l->p, by_z_then_k);
  for (int i = 1; i < l->n; i++)
    if (l->p[i].z == l->p[i - 1].z && l->p[i].k == l->p[i - 1].k)
      return JG_FAIL(err, JG_ECONFIG, "%s:%d: z = %g, k = %g repeats line %d", path,
                     l->p[i].line, l->p[i].z, l->p[i].k / l->k_factor, l->p[i - 1].line);
  if (l->n == 0) return JG_FAIL(err, JG_ECONFIG, "%s: no data rows", path);
  return JG_OK;
}

/* Our table's layout from its last header line (the column names) and h
 * from its effective parameters. */
static jg_status our_layout(const char *path, jg_column_map *map, double *h, double *k_factor,
                            jg_error *err) {
  FILE *f = fopen(path, "r");
  if (!f) return JG_FAIL(err, JG_ECONFIG, "cannot read %s: %s", path, strerror(errno));
  char line[4096], names[4096] = "";
  *h = NAN;
  while (fgets(line, sizeof line, f) && line[0] == '#') {
    double v;
    if (sscanf(line, "# cosmology.hubble_h = %lf;", &v) == 1) *h = v;
    snprintf(names, sizeof names, "%s", line + 1);
  }
  fclose(f);
  char text[JG_MAX_COLUMN_TEXT] = "";
  int unit = -1, found = 0;
  for (char *save = NULL, *tok = strtok_r(names, " \t\r\n", &save); tok;
       tok = strtok_r(NULL, " \t\r\n", &save)) {
    const char *word = "-";
    if (!strcmp(tok, "z") || !strcmp(tok, "delta_c") || !strcmp(tok, "delta_b")) word = tok;
    if (!strcmp(tok, "k[1/Mpc]") || !strcmp(tok, "k[h/Mpc]")) {
      word = "k";
      unit = !strcmp(tok, "k[h/Mpc]");
    }
    found += strcmp(word, "-") != 0;
    if (strlen(text) + strlen(word) + 2 < sizeof text) strcat(strcat(text, " "), word);
  }
  if (found != 4 || unit < 0 || !(*h > 0.0))
    return JG_FAIL(err, JG_ECONFIG,
                   "%s is not a growth table of jeansgrow (its last header line must name z, "
                   "k[1/Mpc] or k[h/Mpc], delta_c and delta_b, and its header "
                   "cosmology.hubble_h)",
                   path);
  *k_factor = unit ? *h : 1.0;
  char why[256];
  if (jg_column_map_parse(text, map, why, sizeof why) != JG_OK)
    return JG_FAIL(err, JG_ECONFIG, "%s: %s", path, why);
  return JG_OK;
}

/* y(x) on the rows [from, to) of `l` by `value` (0 b_over_c, 1 delta_b,
 * 2 delta_c), interpolated in ln k; 0 outside the rows' range. */
static int value_at(const point_list *l, int from, int to, int value, double k, double *y) {
  const int n = to - from;
  const double lo = l->p[from].k, hi = l->p[to - 1].k;
  if (k < lo && k >= lo * (1.0 - CMP_K_SNAP)) k = lo;
  if (k > hi && k <= hi * (1.0 + CMP_K_SNAP)) k = hi;
  if (!(k >= lo && k <= hi)) return 0;
  double xs[n], ys[n];
  for (int i = 0; i < n; i++) {
    const point *p = &l->p[from + i];
    xs[i] = log(p->k);
    ys[i] = value == 0 ? p->bc : value == 1 ? p->db : p->dc;
  }
  /* A k on a row takes the row's value: identical grids compare exactly. */
  for (int i = 0; i < n; i++)
    if (l->p[from + i].k == k) {
      *y = ys[i];
      return 1;
    }
  gsl_interp *in = gsl_interp_alloc(n >= 3 ? gsl_interp_steffen : gsl_interp_linear, (size_t)n);
  if (!in) return -1;
  int ok = gsl_interp_init(in, xs, ys, (size_t)n) == GSL_SUCCESS;
  const double x = fmin(fmax(log(k), xs[0]), xs[n - 1]);
  if (ok) *y = gsl_interp_eval(in, xs, ys, x, NULL);
  gsl_interp_free(in);
  return ok ? 1 : -1;
}

/* The end of the group of rows with the redshift of row `from`. */
static int group_end(const point_list *l, int from) {
  int to = from;
  while (to < l->n && l->p[to].z == l->p[from].z) to++;
  return to;
}

static jg_status compare_group(const point_list *ours, const point_list *ref, int r0, int r1,
                               const char *our_path, const char *ref_path,
                               const jg_compare_layout *layout, double h, jg_comparison *c,
                               jg_error *err) {
  const double z = ref->p[r0].z;
  int o0 = 0;
  while (o0 < ours->n && fabs(ours->p[o0].z - z) > CMP_Z_MATCH * (1.0 + fabs(z))) o0++;
  if (o0 == ours->n)
    return JG_FAIL(err, JG_ECONFIG,
                   "%s:%d: z = %g is not among the redshifts of %s (add it to output.redshifts)",
                   ref_path, ref->p[r0].line, z, our_path);
  const int o1 = group_end(ours, o0);
  const double out_factor = layout->k_unit == JG_TABLE_K_H_PER_MPC ? 1.0 / h : 1.0;
  double norm_ours[2] = {1.0, 1.0}, norm_ref[2] = {1.0, 1.0};
  if (c->n_quantities > 1) {
    const double kn = layout->k_norm * ref->k_factor;
    for (int q = 0; q < 2; q++) {
      if (value_at(ours, o0, o1, 1 + q, kn, &norm_ours[q]) != 1 ||
          value_at(ref, r0, r1, 1 + q, kn, &norm_ref[q]) != 1)
        return JG_FAIL(err, JG_ECONFIG,
                       "the normalisation k = %g lies outside %s or %s at z = %g (their k "
                       "ranges there: %g to %g and %g to %g, in the reference's unit)",
                       layout->k_norm, our_path, ref_path, z, ours->p[o0].k * out_factor,
                       ours->p[o1 - 1].k * out_factor, ref->p[r0].k * out_factor,
                       ref->p[r1 - 1].k * out_factor);
      if (norm_ours[q] == 0.0 || norm_ref[q] == 0.0)
        return JG_FAIL(err, JG_ECONFIG, "delta_%c is 0 at the normalisation k = %g, z = %g",
                       q ? 'c' : 'b', layout->k_norm, z);
    }
  }
  for (int i = r0; i < r1; i++) {
    const point *p = &ref->p[i];
    jg_compare_row row = {.z = p->z, .k = p->k * out_factor};
    row.reference[JG_COMPARE_B_OVER_C] = p->bc;
    row.reference[JG_COMPARE_DELTA_B] = p->db / norm_ref[0];
    row.reference[JG_COMPARE_DELTA_C] = p->dc / norm_ref[1];
    int inside = 1;
    for (int q = 0; q < c->n_quantities && inside; q++) {
      int got = value_at(ours, o0, o1, q, p->k, &row.ours[q]);
      if (got < 0) return JG_FAIL(err, JG_ENOMEM, "compare: cannot build the interpolation");
      inside = got == 1;
    }
    if (!inside) {
      c->n_outside++;
      continue;
    }
    row.ours[JG_COMPARE_DELTA_B] /= norm_ours[0];
    row.ours[JG_COMPARE_DELTA_C] /= norm_ours[1];
    for (int q = 0; q < c->n_quantities; q++) {
      if (row.reference[q] == 0.0)
        return JG_FAIL(err, JG_ECONFIG, "%s:%d: the reference value is 0: no relative difference",
                       ref_path, p->line);
      row.diff[q] = row.ours[q] / row.reference[q] - 1.0;
      jg_compare_stat *s = &c->stat[q];
      if (fabs(row.diff[q]) > s->largest || c->n_rows == 0) {
        s->largest = fabs(row.diff[q]);
        s->z = row.z;
        s->k = row.k;
      }
      s->rms += row.diff[q] * row.diff[q]; /* a sum until the end */
    }
    c->rows[c->n_rows++] = row;
  }
  return JG_OK;
}

void jg_comparison_free(jg_comparison *c) {
  if (!c) return;
  free(c->rows);
  free(c);
}

jg_status jg_compare_tables(const char *ours, const char *reference,
                            const jg_compare_layout *layout, jg_comparison **out,
                            jg_error *err) {
  *out = NULL;
  if (!ours || !reference || !layout)
    return JG_FAIL(err, JG_EINVAL, "jg_compare_tables: tables and layout needed");
  point_list o = {0}, r = {0};
  jg_column_map our_map, ref_map;
  double h = NAN;
  jg_comparison *c = NULL;
  char why[256];
  jg_status st = our_layout(ours, &our_map, &h, &o.k_factor, err);
  o.has_deltas = 1;
  if (st == JG_OK &&
      jg_column_map_parse(layout->columns[0] ? layout->columns : "z k delta_c delta_b", &ref_map,
                          why, sizeof why) != JG_OK)
    st = JG_FAIL(err, JG_ECONFIG, "reference columns: %s", why);
  if (st == JG_OK) {
    const int *col = ref_map.column;
    r.has_deltas = col[JG_COLUMN_DELTA_C] >= 0 && col[JG_COLUMN_DELTA_B] >= 0;
    if (col[JG_COLUMN_Z] < 0 || col[JG_COLUMN_K] < 0 ||
        !(r.has_deltas || col[JG_COLUMN_B_OVER_C] >= 0) ||
        (layout->k_norm > 0.0 && !r.has_deltas))
      st = JG_FAIL(err, JG_ECONFIG,
                   "reference columns: z, k and either delta_c with delta_b or b_over_c are "
                   "needed (delta_c and delta_b for a normalisation k)");
  }
  r.k_factor = layout->k_unit == JG_TABLE_K_H_PER_MPC ? h : 1.0;
  c = calloc(1, sizeof *c);
  if (st == JG_OK && !c) st = JG_FAIL(err, JG_ENOMEM, "compare: out of memory");
  if (st == JG_OK)
    st = jg_table_read_mapped(ours, &our_map, JG_TABLE_BLANKS, 0, collect, &o, &c->checksum_ours,
                              err);
  if (st == JG_OK)
    st = jg_table_read_mapped(reference, &ref_map, layout->separator, 0, collect, &r,
                              &c->checksum_reference, err);
  if (st == JG_OK) st = sort_checked(&o, ours, err);
  if (st == JG_OK) st = sort_checked(&r, reference, err);
  if (st == JG_OK) {
    c->hubble_h = h;
    c->n_quantities = layout->k_norm > 0.0 ? JG_COMPARE_N : 1;
    c->rows = calloc((size_t)r.n, sizeof *c->rows);
    if (!c->rows) st = JG_FAIL(err, JG_ENOMEM, "compare: out of memory");
  }
  for (int r0 = 0; st == JG_OK && r0 < r.n;) {
    const int r1 = group_end(&r, r0);
    st = compare_group(&o, &r, r0, r1, ours, reference, layout, h, c, err);
    r0 = r1;
  }
  if (st == JG_OK && c->n_rows == 0)
    st = JG_FAIL(err, JG_ECONFIG, "%s: no row lies inside the k range of %s", reference, ours);
  free(o.p);
  free(r.p);
  if (st != JG_OK) {
    jg_comparison_free(c);
    return st;
  }
  for (int q = 0; q < c->n_quantities; q++) c->stat[q].rms = sqrt(c->stat[q].rms / c->n_rows);
  *out = c;
  return JG_OK;
}
