/* A tiny program built against an installed jeansgrow: proves the headers,
 * the library and jeansgrow.pc / the CMake package work outside the tree. */
#include <gsl/gsl_errno.h>
#include <stdio.h>

#include <jeansgrow/jeansgrow.h>

int main(void) {
  gsl_set_error_handler_off();
  jg_params p;
  jg_params_set_defaults(&p);
  jg_error err;
  jg_error_clear(&err);
  jg_background *bg = jg_background_new(&p.cosmology, &err);
  jg_thermal *th = bg ? jg_thermal_new(bg, &p.thermal, &err) : NULL;
  jg_epochs e;
  if (!th || jg_epochs_compute(th, &e, &err) != JG_OK) {
    fprintf(stderr, "consumer: %s\n", err.message);
    return 1;
  }
  printf("jeansgrow %s z_star %.2f\n", JG_VERSION_STRING, e.z_star);
  jg_thermal_free(th);
  jg_background_free(bg);
  return 0;
}
