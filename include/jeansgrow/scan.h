/*
 * Parameter scans: one table over a grid of parameter sets.
 *
 * A scan varies one or more numeric parameter keys over a grid (the full
 * product of the axes, the first axis slowest) on top of a base parameter
 * set, evaluates every grid point with an *evaluator* (which columns, and
 * how), and writes one table with a row per (grid point, output redshift):
 * the varied values, the redshift, the evaluator's per-point columns
 * (repeated on each of the point's rows), then its per-redshift columns.
 *
 * The pieces, usable separately (the program's MPI driver uses them):
 *
 *   jg_scan_grid        the axes: KEY=FROM:TO:N[:log], KEY=[v1,...], or the
 *                       `scan.vary` list of a parameter file
 *   jg_scan             grid + base parameters + evaluator (+ the slice I/N of
 *                       a job array), checked point by point before any work
 *   jg_scan_evaluate    one grid point -> its values (thread-safe)
 *   jg_scan_checkpoint  append-only record of finished points, beside the
 *                       output; a run can resume from it after any kill
 *   jg_scan_run         all missing points of the slice on N threads
 *   jg_scan_write_table the table, in grid order, from the checkpoint
 *   jg_scan_merge       the slices of a job array joined into the table
 *
 * The table is written from the checkpoint's exact values (hexadecimal
 * floating point) in grid order, so it is byte-identical whatever the number
 * of threads or MPI ranks, whether or not the run was interrupted and
 * resumed, and whether it ran whole or as slices merged afterwards.
 *
 * A point whose evaluation fails (a numerical failure, say) does not stop
 * the others: it gets no rows, and the table's header lists it with its
 * parameter values and the reason. No NaN or Inf reaches the table: a
 * non-finite value makes its point a failed one.
 *
 * Checkpoint file (text, one record per line, each line ending in
 * " *" + 16 hex digits: FNV-1a 64 of the text before it, so a line torn by a
 * kill is recognised and dropped):
 *   # jeansgrow scan checkpoint 1 fingerprint F part I/N points FIRST+COUNT of TOTAL values V *C
 *   P INDEX V1 V2 ... *C          (a finished point, values in C99 %a)
 *   F INDEX STATUS MESSAGE *C     (a failed point)
 * INDEX counts grid points from 0 in grid order.
 */
#ifndef JEANSGROW_SCAN_H
#define JEANSGROW_SCAN_H

#include <stdio.h>

#include "jeansgrow/error.h"
#include "jeansgrow/params.h"
#include "jeansgrow/thermal.h"

#ifdef __cplusplus
extern "C" {
#endif

/* ---- the grid ------------------------------------------------------------ */

/* Range values are FROM and TO exactly at the ends and, inside, rounded to
 * 15 significant digits (so that `--set KEY=VALUE` with the printed value
 * repeats a point exactly). */
typedef enum {
  JG_SCAN_LINEAR = 0, /* FROM + (TO - FROM) i / (N - 1) */
  JG_SCAN_LOG = 1,    /* FROM (TO / FROM)^(i / (N - 1)), 0 < FROM <= TO */
  JG_SCAN_LIST = 2    /* explicit values, in the order given */
} jg_scan_spacing;

#define JG_SCAN_MAX_AXES 8
#define JG_SCAN_KEY_SIZE 64
/* Largest grid. Nothing is held per grid point before it is computed: the
 * values are computed from the point's index, and the checkpoint's index
 * of finished points takes 8 bytes per point as points finish. */
#define JG_SCAN_MAX_POINTS 100000000LL

typedef struct jg_scan_axis {
  char key[JG_SCAN_KEY_SIZE]; /* a number or integer key of the parameter file */
  jg_scan_spacing spacing;
  double from, to;            /* the range as given (LINEAR, LOG) */
  int count;                  /* number of values */
  double *values;             /* JG_SCAN_LIST: the values, owned by the grid; NULL for a
                                 range, whose values are computed from their index (a grid
                                 of 10^8 points holds no list): use jg_scan_axis_value */
} jg_scan_axis;

/* Value i (0 <= i < count) of an axis, whatever its spacing. An axis of a
 * word-valued key (KEY=[WORD1, WORD2]) holds the words' numbers (their
 * place in jg_params_key_words, which the table writes); its word: */
double jg_scan_axis_value(const jg_scan_axis *ax, long long i);
const char *jg_scan_axis_word(const jg_scan_axis *ax, long long i); /* NULL: not word-valued */

/* Read the fields; change them only through the functions below. Start from
 * a zeroed struct (`jg_scan_grid g = {0};`), release with jg_scan_grid_clear. */
typedef struct jg_scan_grid {
  int n_axes;
  jg_scan_axis axes[JG_SCAN_MAX_AXES];
} jg_scan_grid;

/*
 * Add an axis from text: "KEY=FROM:TO:N" (linear), "KEY=FROM:TO:N:log",
 * "KEY=FROM:TO:N:linear" or "KEY=[V1, V2, ...]". `origin` starts every
 * error message (e.g. "--vary" or "params.cfg:12: scan.vary[0]"; may be
 * NULL). Fails with JG_EINVAL, naming the text and what is allowed, for: bad
 * syntax, N < 1, FROM > TO, N = 1 with FROM != TO, non-positive bounds with
 * log spacing, non-finite numbers, an unknown key (nearest key suggested), a
 * key that is not a single number or word, a fractional value for an
 * integer key, a range of a word-valued key or a word it does not take, a
 * key varied twice, too many axes or points. The grid is unchanged then.
 * A word-valued key is varied over a list of its words, quoted or not:
 * "perturbations.sound_speed=[fluctuating, isothermal]".
 */
jg_status jg_scan_grid_parse(jg_scan_grid *g, const char *text, const char *origin,
                             jg_error *err);
/* The same, from values. */
jg_status jg_scan_grid_add_range(jg_scan_grid *g, const char *key, double from, double to,
                                 long count, jg_scan_spacing spacing, const char *origin,
                                 jg_error *err);
jg_status jg_scan_grid_add_list(jg_scan_grid *g, const char *key, const double *values,
                                long count, const char *origin, jg_error *err);

/*
 * Add the axes of the `scan` group of a parameter file, if it has one:
 *
 *   scan:
 *   {
 *     vary = (
 *       { key = "cosmology.baryon_density_h2"; from = 0.01; to = 0.04; count = 7;
 *         spacing = "log"; },                     # "linear" (default) or "log"
 *       { key = "cosmology.hubble_h"; values = [0.6, 0.7, 0.8]; },
 *       "cosmology.cdm_density_h2=0.10:0.14:3"    # the --vary text also works
 *     );
 *   };
 *
 * `vary` may also be an array of --vary texts: vary = ["k=0:1:3", "..."].
 * Errors name the file, line and element (JG_ECONFIG for the file's syntax
 * and unknown scan keys, JG_EINVAL for the grid itself). A file without a
 * `scan` group adds nothing and succeeds.
 */
jg_status jg_scan_grid_read_file(jg_scan_grid *g, const char *path, jg_error *err);

/* Number of grid points (product of the axis counts; 0 without axes). */
long long jg_scan_grid_points(const jg_scan_grid *g);
/* The varied values of point `index` (0-based, grid order), one per axis. */
void jg_scan_grid_values(const jg_scan_grid *g, long long index, double *values);
/* Set the varied keys of `p` to the values of point `index`. */
jg_status jg_scan_grid_apply(const jg_scan_grid *g, long long index, jg_params *p,
                             jg_error *err);
/* Free the axes' values and empty the grid. */
void jg_scan_grid_clear(jg_scan_grid *g);

/* ---- evaluators ---------------------------------------------------------- */

/*
 * What a scan computes at each grid point. `evaluate` gets the point's full
 * parameter set and fills `point_values` (n_point_columns values) and
 * `redshift_values` (row-major, p->output.n_redshifts rows of
 * n_redshift_columns values, in the order of output.redshifts). It must be
 * reentrant: it is called from many threads at once, each with its own
 * workspace. A non-OK status marks the point as failed, with err's message;
 * JG_ENOMEM stops the whole run.
 *
 * Column names follow the table convention `name[unit]` (no unit for
 * dimensionless columns) and must contain no tab or newline.
 */
/* The rows a point writes (jg_scan_evaluator.rows). */
typedef enum {
  JG_SCAN_ROWS_REDSHIFT = 0,   /* one per output redshift, after a z column */
  JG_SCAN_ROWS_WAVENUMBER = 1, /* one per (output redshift, wavenumber of the base parameters:
                                  perturbations.k_values or the grid), z-major, after a z
                                  column; the evaluator fills n_z x n_k rows of
                                  n_redshift_columns, the first of them being k */
  JG_SCAN_ROWS_POINT = 2       /* one per point, no z column, no per-redshift columns */
} jg_scan_rows;

typedef struct jg_scan_evaluator {
  const char *name;                          /* recorded in the header and the fingerprint */
  int n_point_columns;                       /* one value per grid point */
  const char *const *point_columns;
  int n_redshift_columns;                    /* one value per grid point and redshift */
  const char *const *redshift_columns;
  const char *const *conventions;            /* header lines, NULL-terminated, or NULL */
  void *(*workspace_new)(const jg_params *base); /* NULL: no workspace; NULL result = no memory */
  void (*workspace_free)(void *workspace);
  jg_status (*evaluate)(const jg_params *p, double *point_values, double *redshift_values,
                        void *workspace, const void *user, jg_error *err);
  const void *user;                          /* handed to evaluate as it is (may be NULL) */
  jg_scan_rows rows;                         /* 0: one row per output redshift */
} jg_scan_evaluator;

/*
 * The built-in evaluator. Per point: z_star, z_drag, z_gas_decoupling (as
 * jg_epochs_compute; -1 for an epoch the point's universe lacks). Per redshift: T_gas[K], x_e, and the isothermal Jeans
 * scale of the gas, c_s^2 = k_B T_gas / (mu m_H) (gamma = 1), k_J[1/Mpc] =
 * jg_jeans_wavenumber and M_J[Msun] = jg_mass_half_wavelength(k_J).
 */
const jg_scan_evaluator *jg_scan_evaluator_thermal(void);

/*
 * The growth evaluator (`jeansgrow scan --table growth`): per point z_star,
 * z_drag, z_gas_decoupling as the scales evaluator; per output redshift and
 * wavenumber (JG_SCAN_ROWS_WAVENUMBER) the columns of the `growth` table
 * after its z (k, delta_c, ..., rate_m, flags; not the scale-independent
 * D_ref and rate_ref), in `units`. A varied key may move the wavenumbers
 * (k_min, k_max) but not their number (k_count).
 */
const jg_scan_evaluator *jg_scan_evaluator_growth(jg_output_units units);

/*
 * The epochs evaluator (`jeansgrow scan --table epochs`): one row per point
 * (JG_SCAN_ROWS_POINT) with every value of the `epochs` table, named
 * NAME[UNIT] in `units`; -1 for an epoch (or a value derived from one) the
 * point's universe does not have.
 */
const jg_scan_evaluator *jg_scan_evaluator_epochs(jg_output_units units);

/*
 * The evaluator of `jeansgrow scan`: per point z_star, z_drag,
 * z_gas_decoupling (-1 for an epoch the point's universe lacks); per redshift every column of the `jeansgrow scales`
 * table after its `z`, with the same names and conventions (k_J, M_J, k_F,
 * M_F, k_half, M_half, ...), computed the same way (jg_scales_compute), in
 * `units` (pass the base parameters' output.units; each point is converted
 * with its own cosmology.hubble_h, which a scan may vary).
 */
const jg_scan_evaluator *jg_scan_evaluator_scales(jg_output_units units);

#define JG_SCAN_THERMAL_POINT_COLUMNS 3
#define JG_SCAN_THERMAL_REDSHIFT_COLUMNS 4
/* The built-in columns from a history already built, for an evaluator that
 * adds its own columns after them: point_values gets
 * JG_SCAN_THERMAL_POINT_COLUMNS values, and redshift j of p->output gets
 * JG_SCAN_THERMAL_REDSHIFT_COLUMNS values at redshift_values + j * stride. */
jg_status jg_scan_thermal_columns(const jg_thermal *th, const jg_params *p,
                                  double *point_values, double *redshift_values, int stride,
                                  jg_error *err);

/* ---- a scan -------------------------------------------------------------- */

typedef struct jg_scan jg_scan;

/*
 * Set up a scan of `grid` over `base` with evaluator `ev`, computing the
 * slice part_index of part_count (1-based; 1 of 1 for the whole grid; the
 * slices are contiguous blocks of grid points of near-equal size).
 * Before any work, the grid points' parameters are checked with
 * jg_params_validate and jg_background_new (every point of a grid up to
 * 20,000 points; the corners and 20,000 points spread over a larger one,
 * whose other points jg_scan_evaluate checks at their turn); the first bad
 * point is reported (JG_EINVAL) with its number and varied values. `base` and `grid` are
 * copied; `ev` is referenced and must outlive the scan.
 */
jg_status jg_scan_new(const jg_params *base, const jg_scan_grid *grid,
                      const jg_scan_evaluator *ev, int part_index, int part_count,
                      jg_scan **out, jg_error *err);
void jg_scan_free(jg_scan *s);

long long jg_scan_total_points(const jg_scan *s);  /* of the whole grid */
long long jg_scan_first_point(const jg_scan *s);   /* first index of the slice */
long long jg_scan_slice_points(const jg_scan *s);  /* points in the slice */
int jg_scan_redshifts(const jg_scan *s);           /* output redshifts per point */
int jg_scan_rows_per_point(const jg_scan *s);      /* table rows per point */
int jg_scan_values_per_point(const jg_scan *s);    /* doubles per evaluated point */
const jg_scan_grid *jg_scan_grid_of(const jg_scan *s);
/* 16 hex digits identifying the scan: the version, the base parameters, the
 * grid (exact values), the evaluator's columns and the content of the start
 * table (perturbations.initial_table), if any; the same for every slice. */
const char *jg_scan_fingerprint(const jg_scan *s);
/* "key = value, key = value" for point `index`, for messages. */
void jg_scan_describe_point(const jg_scan *s, long long index, char *buf, size_t size);

/* A workspace for jg_scan_evaluate: one per thread, reused across points.
 * NULL (with err set) when out of memory. */
void *jg_scan_workspace_new(const jg_scan *s, jg_error *err);
void jg_scan_workspace_free(const jg_scan *s, void *workspace);
/* Evaluate grid point `index` into values[jg_scan_values_per_point(s)]:
 * the per-point columns, then each redshift's columns. Non-finite results
 * fail with JG_ENUMERIC naming the column and redshift. */
jg_status jg_scan_evaluate(const jg_scan *s, long long index, void *workspace, double *values,
                           jg_error *err);

/* ---- checkpoint ---------------------------------------------------------- */

typedef struct jg_scan_checkpoint jg_scan_checkpoint;

/*
 * Open the checkpoint of scan `s` at `path`, or an anonymous temporary one
 * when path is NULL (nothing to resume from then).
 * The file is locked (an advisory open-file lock) until it is closed: a
 * file another open holds is refused (JG_EINVAL, "locked by another
 * jeansgrow scan"), with or without resume, and left as it is.
 * resume = 0: the file must not exist (JG_EINVAL otherwise: a previous run
 *             was interrupted; resume it or remove the file).
 * resume = 1: an existing file is read: it must belong to the same scan and
 *             slice (JG_EINVAL otherwise); its valid records count as done,
 *             a torn last line is cut off; a damaged header or damage before
 *             the last line is refused (JG_EINVAL, naming the line) and the
 *             file left as it is. A missing or empty file, or one holding
 *             only the start of this scan's header, starts afresh.
 */
jg_status jg_scan_checkpoint_open(const jg_scan *s, const char *path, int resume,
                                  jg_scan_checkpoint **out, jg_error *err);
/* Where the program keeps the checkpoint of the table `output`:
 * OUTPUT.checkpoint, or, for a name so long that the suffix would pass the
 * longest name the system allows (255 bytes), the name cut short with a
 * hash of the whole path: CUT~HHHHHHHHHHHHHHHH.checkpoint. Free the result;
 * NULL when out of memory. */
char *jg_scan_checkpoint_path_for(const char *output);
/* Record a finished point (status JG_OK: `values` holds
 * jg_scan_values_per_point values) or a failed one (`message` says why).
 * Thread-safe. Each record is flushed to the system at once, and synced to
 * the disk at least once a second. JG_EIO if it cannot be written. */
jg_status jg_scan_checkpoint_add(jg_scan_checkpoint *c, long long index, jg_status status,
                                 const double *values, const char *message, jg_error *err);
/* Is point `index` recorded? Safe during a run for points not being
 * recorded at that moment (the runner asks only about points it has not
 * handed out). The counters below are exact between runs; during a run,
 * read them from the listener's event. */
int jg_scan_checkpoint_has(const jg_scan_checkpoint *c, long long index);
long long jg_scan_checkpoint_done(const jg_scan_checkpoint *c);   /* recorded, failed included */
long long jg_scan_checkpoint_failed(const jg_scan_checkpoint *c);
long long jg_scan_checkpoint_resumed(const jg_scan_checkpoint *c);/* read back at open */
const char *jg_scan_checkpoint_path(const jg_scan_checkpoint *c); /* NULL when anonymous */
/* Sync and close; with remove_file, delete the file too. Accepts NULL. */
void jg_scan_checkpoint_close(jg_scan_checkpoint *c, int remove_file);

/* ---- running ------------------------------------------------------------- */

typedef struct jg_scan_event {
  long long index;       /* the point just finished */
  jg_status status;      /* JG_OK or why it failed */
  const char *message;   /* the failure, "" on success */
  long long done;        /* points of the slice recorded so far (resumed included) */
  long long failed;
  long long total;       /* points of the slice */
} jg_scan_event;

/* Called once per finished point, one call at a time (under the run's lock;
 * keep it short and do not call back into the run). */
typedef void (*jg_scan_listener)(void *context, const jg_scan_event *event);

/* Evaluate every point of the slice missing from `c` on `threads` threads
 * (>= 1) and record each. Returns JG_OK when every point is recorded (some
 * may have failed: see jg_scan_checkpoint_failed), or the error that stopped
 * the run (JG_ENOMEM, JG_EIO). */
jg_status jg_scan_run(const jg_scan *s, jg_scan_checkpoint *c, int threads,
                      jg_scan_listener listener, void *context, jg_error *err);

/* ---- threads over a feed of point indices -------------------------------- */

/*
 * Where a runner's threads take point indices and where their results go,
 * so that a driver other than jg_scan_run (the program's MPI ranks, say)
 * reuses the threads and keeps only its own bookkeeping. The three
 * functions are called from the runner's threads at once: they must be
 * thread-safe.
 *   take  the next index to evaluate, or -1 when there is none: the thread
 *         then ends;
 *   give  a finished point: status JG_OK with its values
 *         (jg_scan_values_per_point of them; valid during the call only), or
 *         the failure and its message (JG_ENOMEM: the point has no result,
 *         and a feed normally stops the run); seconds it took;
 *   fail  the thread cannot start (no memory for its workspace); a feed
 *         normally makes take return -1 from then on.
 */
typedef struct jg_scan_feed {
  void *context;
  long long (*take)(void *context);
  void (*give)(void *context, long long index, jg_status status, const double *values,
               const char *message, double seconds);
  void (*fail)(void *context, const jg_error *err);
} jg_scan_feed;

typedef struct jg_scan_runner jg_scan_runner;

/* Start up to `threads` (>= 1) threads over `feed` (copied). The number
 * that did start may be smaller (jg_scan_runner_threads; 0 when the system
 * gives none: then call jg_scan_feed_work yourself). JG_ENOMEM, JG_EINVAL. */
jg_status jg_scan_runner_start(const jg_scan *s, int threads, const jg_scan_feed *feed,
                               jg_scan_runner **out, jg_error *err);
int jg_scan_runner_threads(const jg_scan_runner *r);
/* Wait for every thread to end (each ends when take returns -1), then free
 * the runner. Accepts NULL. */
void jg_scan_runner_join(jg_scan_runner *r);
/* What one runner thread does, in the calling thread: take, evaluate, give,
 * until take returns -1. */
void jg_scan_feed_work(const jg_scan *s, const jg_scan_feed *feed);

/*
 * The feed of one slice: hands out the points of s's slice missing from c,
 * in grid order, and records each result in c (telling `listener`, as
 * jg_scan_run does). A failed record, a JG_ENOMEM result, fail or
 * jg_scan_slice_feed_stop stop it: take returns -1 from then on.
 * jg_scan_run is this feed on a runner; the program's MPI manager feeds its
 * own threads and the other ranks' results through it too.
 */
typedef struct jg_scan_slice_feed jg_scan_slice_feed;
jg_status jg_scan_slice_feed_new(const jg_scan *s, jg_scan_checkpoint *c,
                                 jg_scan_listener listener, void *context,
                                 jg_scan_slice_feed **out, jg_error *err);
jg_scan_feed jg_scan_slice_feed_of(jg_scan_slice_feed *f);
/* Points neither recorded nor handed out yet. */
long long jg_scan_slice_feed_unassigned(jg_scan_slice_feed *f);
void jg_scan_slice_feed_stop(jg_scan_slice_feed *f);
/* Free it; returns the error that stopped it (copied to err), or JG_OK. */
jg_status jg_scan_slice_feed_free(jg_scan_slice_feed *f, jg_error *err);

/* ---- the table ----------------------------------------------------------- */

/* Write the table of the slice to `f` from the checkpoint (every point of
 * the slice must be recorded: JG_EINVAL otherwise). A slice of a job array
 * carries a `# scan part` line, so that jg_scan_merge can join the slices. */
jg_status jg_scan_write_table(const jg_scan *s, jg_scan_checkpoint *c, FILE *f, jg_error *err);

/* Join the slice tables at `paths` (any order) into the whole table, byte
 * for byte what a single run writes. Fails (JG_EINVAL) naming the file if a
 * file cannot be opened or is not a regular file, is not a scan slice,
 * slices belong to different scans (fingerprints differ) or disagree in
 * their headers, a slice is missing or given twice; and naming the file and
 * line if a row is cut short or is not the slice's number of finite numbers
 * (no NaN or Inf). */
jg_status jg_scan_merge(const char *const *paths, int n_paths, FILE *out, jg_error *err);

#ifdef __cplusplus
}
#endif
#endif
