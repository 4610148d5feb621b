/*
 * Ties the values of include/jeansgrow/constants.h to relations and
 * figures outside the header: CODATA relations between the constants
 * (sigma_SB from h, c and k_B; the Rydberg relation; mass ratios), atomic
 * masses against the particles and their binding energy, the parsec from
 * the astronomical unit, and published values the header does not copy. A
 * literal is never compared with itself.
 *
 * Tolerances: the published figure's rounding (half a unit of its last
 * digit) or its CODATA standard uncertainty, whichever is wider, unless a
 * wider one is explained beside the check.
 */
#include <math.h>

#include <criterion/criterion.h>
#include <criterion/new/assert.h>

#include "jeansgrow/constants.h"
#include "support.h"

/* ---- CODATA relations ---------------------------------------------------- */

/* CODATA 2018 inputs used only here: alpha = 7.2973525693e-3 (rel. unc.
 * 1.5e-10), R_inf = 10973731.568160 m^-1, m_e/u = 5.48579909065e-4 (rel.
 * unc. 2.9e-11), m_p/u = 1.007276466621 (5.3e-11), alpha-particle mass
 * 6.6446573357e-27 kg (3.0e-10). */

Test(constants, stefan_boltzmann_and_radiation_constants_from_h_c_k) {
  /* sigma_SB = 2 pi^5 k_B^4 / (15 h^3 c^2), exact in the 2019 SI; CODATA
   * prints it truncated to 10 digits (up to 1.8e-10 relative). */
  const double k4 = pow(JG_K_BOLTZMANN, 4), h3 = pow(JG_H_PLANCK, 3);
  double sigma = 2.0 * pow(JG_PI, 5) * k4 / (15.0 * h3 * JG_C_LIGHT * JG_C_LIGHT);
  assert_rel(JG_SIGMA_STEFAN_BOLTZMANN, sigma, 2e-10, "sigma_SB from h, c, k_B");
  /* a_rad = 4 sigma_SB / c = 8 pi^5 k_B^4 / (15 h^3 c^3). */
  assert_rel(JG_A_RADIATION, 4.0 * sigma / JG_C_LIGHT, 2e-10, "a_rad = 4 sigma_SB / c");
}

Test(constants, rydberg_relation_ties_the_electron_mass) {
  /* R_inf = alpha^2 m_e c / (2 h): m_e, h and c against the Rydberg
   * constant; alpha^2 and m_e carry 3e-10 each, tolerance 1e-9. */
  const double alpha = 7.2973525693e-3;
  double r_inf = alpha * alpha * JG_M_ELECTRON * JG_C_LIGHT / (2.0 * JG_H_PLANCK);
  assert_rel(r_inf, 10973731.568160, 1e-9, "R_inf = alpha^2 m_e c / (2 h)");
}

Test(constants, particle_masses_in_atomic_mass_units) {
  /* The ratios are known far better than the masses in kg; each literal is
   * printed to 11-12 digits (rounding up to 5e-12). */
  assert_rel(JG_M_ELECTRON / JG_ATOMIC_MASS_UNIT, 5.48579909065e-4, 5e-11, "m_e / u");
  assert_rel(JG_M_PROTON / JG_ATOMIC_MASS_UNIT, 1.007276466621, 1e-10, "m_p / u");
}

Test(constants, derived_fundamental_values_match_codata) {
  /* hbar = 1.054571817...e-34 J s (CODATA 2018, exact but printed truncated
   * to 10 digits): the truncation can be one unit of the last digit,
   * 9.5e-10 relative. */
  assert_rel(JG_HBAR, 1.054571817e-34, 1e-9, "hbar (CODATA 2018)");
  /* k_B in eV/K = 8.617333262e-5 (CODATA 2018, 10 digits). */
  assert_rel(JG_K_BOLTZMANN / JG_ELECTRON_VOLT, 8.617333262e-5, 6e-11, "k_B in eV/K (CODATA 2018)");
  /* m_p/m_e = 1836.15267343(11) (CODATA 2018). Each mass is printed to 11
   * digits (rounding up to 3e-12 and 5e-12 relative), so their ratio can sit
   * 1e-11 away; measured 5.5e-12. */
  assert_rel(JG_M_PROTON / JG_M_ELECTRON, 1836.15267343, 1e-11, "m_p/m_e (CODATA 2018)");
}

/* ---- combinations ------------------------------------------------------- */

Test(constants, thomson_cross_section_from_classical_electron_radius) {
  /* sigma_T = (8 pi/3) r_e^2. CODATA 2018 inputs used here only:
   * epsilon_0 = 8.8541878128e-12 F/m (rel. unc. 1.5e-10),
   * alpha = 7.2973525693e-3 (rel. unc. 1.5e-10). sigma_T ~ r_e^2 ~ alpha^2,
   * so the two routes agree with the table to ~3e-10 (measured: 1.1e-11 via
   * epsilon_0, 1.7e-11 via alpha); 1e-9 allows for the uncertainties. */
  const double eps0 = 8.8541878128e-12, alpha = 7.2973525693e-3;
  const double e = JG_ELECTRON_VOLT; /* elementary charge, C (exact) */
  const double mc2 = JG_M_ELECTRON * JG_C_LIGHT * JG_C_LIGHT;
  double r_e = e * e / (4.0 * JG_PI * eps0 * mc2);
  assert_rel((8.0 * JG_PI / 3.0) * r_e * r_e, JG_SIGMA_THOMSON, 1e-9, "sigma_T via epsilon_0");
  /* r_e = 2.8179403262e-15 m (CODATA 2018, 11 digits). */
  assert_rel(r_e, 2.8179403262e-15, 1e-10, "classical electron radius (CODATA 2018)");
  double r_e_alpha = alpha * JG_HBAR / (JG_M_ELECTRON * JG_C_LIGHT);
  assert_rel((8.0 * JG_PI / 3.0) * r_e_alpha * r_e_alpha, JG_SIGMA_THOMSON, 1e-9,
             "sigma_T via alpha");
}

Test(constants, radiation_constant) {
  /* a_rad = 4 sigma_SB / c = 7.565733e-16 J m^-3 K^-4, derived from CODATA
   * 2018 (7 digits: half a unit is 6.6e-8). */
  assert_rel(JG_A_RADIATION, 7.565733e-16, 1e-7, "a_rad");
}

Test(constants, critical_density_and_photon_density) {
  /* rho_crit/h^2 = 3 H100^2 / (8 pi G) = 1.878342e-26 kg m^-3
   * = 2.775366e11 M_sun Mpc^-3; omega_gamma = a_rad T0^4 / (c^2 rho_crit/h^2)
   * = 2.472975e-5 for T0 = 2.7255 K, derived from CODATA 2018 and IAU
   * (7-digit values, half a unit ~3e-7; tolerance 1e-6). */
  double rho_crit_h2 = 3.0 * JG_H100 * JG_H100 / (8.0 * JG_PI * JG_G_NEWTON);
  assert_rel(rho_crit_h2, 1.878342e-26, 1e-6, "rho_crit/h^2 [kg m^-3]");
  assert_rel(rho_crit_h2 * JG_MPC * JG_MPC * JG_MPC / JG_M_SUN, 2.775366e11, 1e-6,
             "rho_crit/h^2 [M_sun Mpc^-3]");
  const double T0 = 2.7255;
  double omega_gamma_h2 = JG_A_RADIATION * pow(T0, 4) / (JG_C_LIGHT * JG_C_LIGHT * rho_crit_h2);
  assert_rel(omega_gamma_h2, 2.472975e-5, 1e-6, "omega_gamma h^2 at T0 = 2.7255 K");
}

/* ---- atoms -------------------------------------------------------------- */

Test(constants, atomic_masses) {
  /* m(1H) = 1.6735328e-27 kg (derived here from 1.00782503223 u, AME2016,
   * and CODATA 2018 u; 8 digits). */
  assert_rel(JG_M_HYDROGEN_ATOM, 1.6735328e-27, 3e-8, "m(1H) in kg");
  /* A 1H atom is a proton plus an electron less 13.6 eV of binding: the
   * mass from the atomic-mass table must reproduce m_p + m_e - E_ion/c^2
   * within the uncertainties: u and m_p each carry 3e-10 relative (CODATA
   * 2018), the atomic mass 9e-11; measured difference 3.0e-10, tolerance
   * 1e-9 (about two combined standard uncertainties). The binding term is
   * 1.4e-8 of the mass, so a wrong or missing one fails. */
  double bound = JG_M_PROTON + JG_M_ELECTRON - JG_E_ION_HYDROGEN / (JG_C_LIGHT * JG_C_LIGHT);
  assert_rel(JG_M_HYDROGEN_ATOM, bound, 1e-9, "m(1H) = m_p + m_e - binding");
  /* The same for 4He: the alpha particle, two electrons, less the two
   * ionisation energies (79 eV, 2.1e-8 of the mass); measured 2.7e-12,
   * tolerance 1e-9 as above. */
  const double m_alpha = 6.6446573357e-27;
  double bound_he = m_alpha + 2.0 * JG_M_ELECTRON -
                    (JG_E_ION_HELIUM_I + JG_E_ION_HELIUM_II) / (JG_C_LIGHT * JG_C_LIGHT);
  assert_rel(JG_M_HELIUM4_ATOM, bound_he, 1e-9, "m(4He) = m_alpha + 2 m_e - binding");
}

Test(constants, hydrogen_ionisation_energy) {
  /* NIST Handbook of Basic Atomic Spectroscopic Data (H, ref. MK00a):
   * 109678.7717 cm^-1. Converted with CODATA 2018 hc this is 13.5984346 eV;
   * the header carries NIST's printed 13.598434 eV, 4.4e-8 lower (NIST's
   * rounding against the CODATA 2018 conversion, which gives ...435).
   * Tolerance 1e-7 admits that rounding and nothing larger. */
  double from_wavenumber = 109678.7717 * 100.0 * JG_H_PLANCK * JG_C_LIGHT;
  assert_rel(JG_E_ION_HYDROGEN, from_wavenumber, 1e-7, "E_ion(H) vs NIST wavenumber");
  /* It must be the real atom, not the infinite-mass Rydberg energy
   * 13.605693122994 eV (CODATA 2018): the reduced-mass Bohr value
   * Ry hc / (1 + m_e/m_p) = 13.598287 eV is 1.1e-5 below NIST (no
   * relativistic and QED terms); 2e-5 tells the two apart from 13.6057
   * (5e-4 away). */
  const double ry_hc = 13.605693122994 * JG_ELECTRON_VOLT;
  double bohr = ry_hc / (1.0 + JG_M_ELECTRON / JG_M_PROTON);
  assert_rel(JG_E_ION_HYDROGEN, bohr, 2e-5, "E_ion(H) vs reduced-mass Bohr energy");
}

Test(constants, helium_ionisation_energies) {
  /* He I: 24.587389 eV (NIST ASD, value from memory); the header keeps 5
   * digits, 24.587 (half a unit 2.0e-5 relative; measured 1.6e-5). */
  assert_rel(JG_E_ION_HELIUM_I / JG_ELECTRON_VOLT, 24.587389, 2.1e-5, "E_ion(He I)");
  /* He II is hydrogen-like: 4 Ry hc / (1 + m_e/m_alpha) = 54.41531 eV with
   * CODATA 2018 Ry hc = 13.605693122994 eV and alpha-particle mass
   * 6.6446573357e-27 kg. The non-relativistic Bohr formula misses the
   * relativistic/QED shift, ~5e-5 of the total at Z = 2 (Z^2 times the
   * hydrogen 1.1e-5); tolerance 1e-4. */
  const double m_alpha = 6.6446573357e-27;
  double bohr = 4.0 * 13.605693122994 * JG_ELECTRON_VOLT / (1.0 + JG_M_ELECTRON / m_alpha);
  assert_rel(JG_E_ION_HELIUM_II, bohr, 1e-4, "E_ion(He II) vs hydrogen-like Bohr energy");
}

Test(constants, lyman_alpha_and_two_photon_rate) {
  /* Level-weighted 2p energy 82259.163 cm^-1 (NIST levels, Kramida et al.)
   * gives 121.567004 nm; the header keeps 6 digits (half a unit 4e-6
   * relative). */
  assert_rel(JG_LAMBDA_LYMAN_ALPHA, 1.0 / (82259.163 * 100.0), 5e-6, "Lyman-alpha wavelength");
  /* Goldman 1989: 8.2245809 s^-1 (value from memory, 6 digits 8.22458 quoted
   * by Seager, Sasselov & Scott 1999); the header rounds to 8.2246 (half a
   * unit 6e-6). */
  assert_rel(JG_RATE_2S1S, 8.2245809, 6e-6, "2s->1s two-photon rate");
}

/* ---- astronomy ---------------------------------------------------------- */

Test(constants, astronomical_lengths) {
  /* au = 149 597 870 700 m exactly (IAU 2012 Resolution B2): light crosses
   * it in tau_A = 499.004783836 s (IAU 2009 system of astronomical
   * constants; value from memory; 12 digits, half a unit 1e-12). */
  assert_rel(JG_ASTRONOMICAL_UNIT / JG_C_LIGHT, 499.004783836, 2e-12, "au light time");
  /* pc = 648000/pi au (IAU 2015 B2 note 4); 1e-15 allows one rounding of
   * the division. */
  assert_rel(JG_PARSEC, 648000.0 / JG_PI * JG_ASTRONOMICAL_UNIT, 1e-15, "parsec = 648000/pi au");
  assert_rel(JG_MPC, 1e6 * 648000.0 / JG_PI * JG_ASTRONOMICAL_UNIT, 1e-15, "Mpc");
  /* Light-year: c times the Julian year 365.25 d (IAU) = 9.4607304725808e15 m
   * (IAU); an even integer below 2^54, so the product is exact. */
  assert_rel(JG_LIGHT_YEAR, 9.4607304725808e15, 0.0, "light-year (IAU)");
  assert_rel(JG_GYR, 1e9 * JG_LIGHT_YEAR / JG_C_LIGHT, 1e-15, "Gyr (Julian)");
  /* 100 km/s/Mpc = 1/(9.7779222 Gyr) (derived here from IAU pc and the
   * Julian year; 8 digits, half a unit 5e-9). */
  assert_rel(1.0 / JG_H100 / JG_GYR, 9.7779222, 1e-8, "Hubble time for h = 1 [Gyr]");
}

Test(constants, solar_mass) {
  /* G M_sun against the nominal GM_sun = 1.3271244e20 m^3 s^-2 (IAU 2015
   * Resolution B3): M_sun = 1.98840987e30 kg with CODATA 2018 G; the header
   * keeps 6 digits 1.98841e30 (half a unit 2.5e-6). */
  assert_rel(JG_G_NEWTON * JG_M_SUN, 1.3271244e20, 2.5e-6, "G M_sun (IAU 2015 B3)");
}

Test(constants, pi) {
  /* Common practice, no source: the nearest double to pi. */
  assert_rel(JG_PI, M_PI, 0.0, "pi");
  assert_rel(JG_PI, 4.0 * atan(1.0), 0.0, "pi = 4 atan 1");
}
