/*
 * Physical and astronomical constants, SI units, one per line with its source.
 *
 * CODATA 2018 (Tiesinga et al. 2021, Rev. Mod. Phys. 93, 025010) for the
 * fundamental constants; exact values are those fixed by the 2019 SI.
 * IAU 2015 Resolution B3 for the nominal solar mass parameter, IAU 2012
 * Resolution B2 for the astronomical unit (parsec derived, IAU 2015 B2 note 4).
 * Atomic data from NIST (Atomic Spectra Database / Handbook of Basic Atomic
 * Spectroscopic Data). tests/test_constants.c pins every value.
 */
#ifndef JEANSGROW_CONSTANTS_H
#define JEANSGROW_CONSTANTS_H

/* --- fundamental constants ---------------------------------------------- */
#define JG_C_LIGHT 299792458.0            /* m s^-1, exact (SI) */
#define JG_G_NEWTON 6.67430e-11           /* m^3 kg^-1 s^-2, CODATA 2018 */
#define JG_H_PLANCK 6.62607015e-34        /* J s, exact (SI 2019) */
#define JG_HBAR (JG_H_PLANCK / (2.0 * 3.14159265358979323846)) /* J s, derived */
#define JG_K_BOLTZMANN 1.380649e-23       /* J K^-1, exact (SI 2019) */
#define JG_ELECTRON_VOLT 1.602176634e-19  /* J, exact (SI 2019) */
#define JG_M_ELECTRON 9.1093837015e-31    /* kg, CODATA 2018 */
#define JG_M_PROTON 1.67262192369e-27     /* kg, CODATA 2018 */
#define JG_ATOMIC_MASS_UNIT 1.66053906660e-27 /* kg, CODATA 2018 */
#define JG_SIGMA_THOMSON 6.6524587321e-29 /* m^2, CODATA 2018 */
#define JG_SIGMA_STEFAN_BOLTZMANN 5.670374419e-8 /* W m^-2 K^-4, CODATA 2018 (exact) */
#define JG_A_RADIATION (4.0 * JG_SIGMA_STEFAN_BOLTZMANN / JG_C_LIGHT) /* J m^-3 K^-4 */

/* --- atoms -------------------------------------------------------------- */
/* Mass of the 1H atom: 1.00782503223 u (AME2016 / NIST atomic weights). */
#define JG_M_HYDROGEN_ATOM (1.00782503223 * JG_ATOMIC_MASS_UNIT) /* kg */
/* Mass of the 4He atom: 4.00260325413 u (AME2016 / NIST atomic weights). */
#define JG_M_HELIUM4_ATOM (4.00260325413 * JG_ATOMIC_MASS_UNIT) /* kg */
/* Ionisation energy of 1H: 109678.7717 cm^-1 (NIST Handbook, ref. MK00a),
 * the real atom, not the infinite-mass Rydberg energy 13.605693 eV. */
#define JG_E_ION_HYDROGEN (13.598434 * JG_ELECTRON_VOLT) /* J */
/* Lyman-alpha wavelength, level-weighted 2p -> 1s (NIST levels). */
#define JG_LAMBDA_LYMAN_ALPHA 121.567e-9  /* m */
/* Two-photon decay rate 2s -> 1s (Goldman 1989, Phys. Rev. A 40, 1185). */
#define JG_RATE_2S1S 8.2246               /* s^-1 */
/* Helium ionisation energies (NIST ASD): He I -> He II and He II -> He III. */
#define JG_E_ION_HELIUM_I (24.587 * JG_ELECTRON_VOLT)  /* J */
#define JG_E_ION_HELIUM_II (54.418 * JG_ELECTRON_VOLT) /* J */

/* --- astronomy ---------------------------------------------------------- */
#define JG_ASTRONOMICAL_UNIT 149597870700.0  /* m, exact (IAU 2012 B2) */
#define JG_PARSEC 3.0856775814913673e16      /* m, 648000/pi au (IAU 2015 B2) */
#define JG_MPC (1.0e6 * JG_PARSEC)           /* m */
/* Nominal solar mass parameter GM_sun = 1.3271244e20 m^3 s^-2 (IAU 2015 B3)
 * divided by CODATA 2018 G. */
#define JG_M_SUN 1.98841e30                  /* kg */
#define JG_JULIAN_YEAR (365.25 * 86400.0)    /* s, exact (IAU) */
#define JG_LIGHT_YEAR (JG_C_LIGHT * JG_JULIAN_YEAR) /* m, 9.4607304725808e15 */
#define JG_GYR (1.0e9 * JG_JULIAN_YEAR)      /* s */
#define JG_MYR (1.0e6 * JG_JULIAN_YEAR)      /* s */
/* 100 km/s/Mpc in s^-1: the unit of the dimensionless Hubble parameter h. */
#define JG_H100 (1.0e5 / JG_MPC)             /* s^-1 */

/* --- numbers ------------------------------------------------------------ */
#define JG_PI 3.14159265358979323846

#endif
