/*
 * `jeansgrow scan` for programs that embed the library (stable, like
 * jg_config): the whole table in memory, computed on threads.
 */
#ifndef JEANSGROW_EMBED_SCAN_H
#define JEANSGROW_EMBED_SCAN_H

#include <stddef.h>

#include "jeansgrow/config.h"
#include "jeansgrow/error.h"

#ifdef __cplusplus
extern "C" {
#endif

/*
 * The table `jeansgrow scan` writes for the parameters `c` over the grid
 * of `vary` (n_vary texts as --vary takes them: "KEY=FROM:TO:N[:log]" or
 * "KEY=[V1, V2, ...]"; the first varies slowest), on `threads` threads
 * (>= 1), as zero-terminated text in *text (*size bytes; size may be NULL)
 * to release with jg_free. Bad axes and impossible grid points are refused
 * before any work (JG_EINVAL, the program's messages). A point whose
 * solver fails gets no rows and is listed in the table's header, as in the
 * program's table; *failed (may be NULL) counts such points.
 */
jg_status jg_config_scan(const jg_config *c, const char *const *vary, int n_vary, int threads,
                         char **text, size_t *size, long long *failed, jg_error *err);

#ifdef __cplusplus
}
#endif
#endif
