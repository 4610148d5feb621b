/*
 * background_dump: print H(z), cosmic time and distances of one cosmology, so
 * that tests/python/check_background_astropy.py can compare them with Astropy.
 * A test helper, not part of the library or the program.
 *
 * CMake (tests/CMakeLists.txt). Debian's Astropy lives under /usr/bin/python3,
 * not necessarily the python3 first on PATH, hence the fixed path:
 *   add_executable(background_dump background_dump.c)
 *   target_link_libraries(background_dump PRIVATE jeansgrow_static)
 *   target_compile_options(background_dump PRIVATE ${JG_WARNINGS})
 *   if(EXISTS /usr/bin/python3)
 *     add_test(NAME background_astropy
 *              COMMAND /usr/bin/python3
 *                      ${CMAKE_CURRENT_SOURCE_DIR}/python/check_background_astropy.py
 *                      $<TARGET_FILE:background_dump>)
 *   endif()
 *
 * Usage:
 *   background_dump h omega_b_h2 omega_c_h2 omega_k T_cmb N_eff w0 wa z1 [z2 ...]
 *
 * Output: '#' lines (the derived density parameters, then the column names),
 * then one tab-separated row per redshift, full double precision:
 *   z  H[km/s/Mpc]  age[Gyr]  comoving_distance[Mpc]  transverse_distance[Mpc]
 * "age" is the cosmic time at z. Exit status 2 for bad usage or a rejected
 * cosmology, 1 for a failed integral.
 */
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>

#include <gsl/gsl_errno.h>

#include "jeansgrow/background.h"
#include "jeansgrow/constants.h"

static int parse_double(const char *text, const char *name, double *out) {
  char *end = NULL;
  errno = 0;
  double v = strtod(text, &end);
  if (end == text || *end != '\0' || errno == ERANGE) {
    fprintf(stderr, "background_dump: %s: not a number: '%s'\n", name, text);
    return 0;
  }
  *out = v;
  return 1;
}

int main(int argc, char **argv) {
  static const char *const names[] = {"h", "omega_b_h2", "omega_c_h2", "omega_k",
                                      "T_cmb",  "N_eff",      "w0",         "wa"};
  enum { N_COSMO = 8 };
  if (argc < N_COSMO + 2) {
    fprintf(stderr,
            "usage: background_dump h omega_b_h2 omega_c_h2 omega_k T_cmb N_eff w0 wa z1 "
            "[z2 ...]\n");
    return 2;
  }
  gsl_set_error_handler_off();
  double v[N_COSMO];
  for (int i = 0; i < N_COSMO; ++i)
    if (!parse_double(argv[1 + i], names[i], &v[i])) return 2;
  jg_cosmology c = {
      .hubble_h = v[0],
      .baryon_density_h2 = v[1],
      .cdm_density_h2 = v[2],
      .curvature_omega = v[3],
      .cmb_temperature_K = v[4],
      /* Y_P does not enter H, ages or distances; any valid value will do. */
      .helium_mass_fraction = 0.2454,
      .neutrino_number_eff = v[5],
      .de_w0 = v[6],
      .de_wa = v[7],
  };
  jg_error err;
  jg_error_clear(&err);
  jg_background *bg = jg_background_new(&c, &err);
  if (!bg) {
    fprintf(stderr, "background_dump: %s\n", err.message);
    return 2;
  }
  printf("# omega_m %.17g omega_r %.17g omega_gamma %.17g omega_nu %.17g omega_k %.17g "
         "omega_de %.17g\n",
         bg->omega_m, bg->omega_r, bg->omega_gamma, bg->omega_nu, bg->omega_k, bg->omega_de);
  printf("# z\tH[km/s/Mpc]\tage[Gyr]\tcomoving_distance[Mpc]\ttransverse_distance[Mpc]\n");
  const double h_unit = 1.0e3 / JG_MPC; /* 1 km/s/Mpc in s^-1 */
  int rc = 0;
  for (int i = N_COSMO + 1; i < argc && rc == 0; ++i) {
    double z, t, dc, dm;
    if (!parse_double(argv[i], "redshift", &z)) {
      rc = 2;
      break;
    }
    double a = 1.0 / (1.0 + z);
    if (jg_background_cosmic_time(bg, a, &t, &err) != JG_OK ||
        jg_background_comoving_distance(bg, z, &dc, &err) != JG_OK ||
        jg_background_transverse_distance(bg, z, &dm, &err) != JG_OK) {
      fprintf(stderr, "background_dump: %s\n", err.message);
      rc = err.status == JG_EINVAL ? 2 : 1;
      break;
    }
    printf("%.17g\t%.17g\t%.17g\t%.17g\t%.17g\n", z, jg_background_hubble(bg, a) / h_unit,
           t / JG_GYR, dc, dm);
  }
  jg_background_free(bg);
  return rc;
}
