/*
 * jeansgrow: Jeans and filtering scales and the linear growth of baryon and
 * dark-matter perturbations with gas pressure, from before recombination to
 * the end of the dark ages. Umbrella header: include this one.
 *
 * Stages, data flowing one way:
 *   params -> background -> thermal (recombination, gas temperature)
 *          -> perturb (linear growth per k) -> scales, growth -> report
 * with epochs (derived epochs), jeans (Jeans scales), table (output files)
 * beside them, and scan (parameter grids) on top.
 */
#ifndef JEANSGROW_JEANSGROW_H
#define JEANSGROW_JEANSGROW_H

#include "jeansgrow/background.h"
#include "jeansgrow/config.h"
#include "jeansgrow/constants.h"
#include "jeansgrow/embed_scan.h"
#include "jeansgrow/epochs.h"
#include "jeansgrow/error.h"
#include "jeansgrow/growth.h"
#include "jeansgrow/jeans.h"
#include "jeansgrow/params.h"
#include "jeansgrow/perturb.h"
#include "jeansgrow/report.h"
#include "jeansgrow/scales.h"
#include "jeansgrow/scan.h"
#include "jeansgrow/table.h"
#include "jeansgrow/thermal.h"
#include "jeansgrow/universe.h"
#include "jeansgrow/validity.h"
#include "jeansgrow/version.h"

#endif
