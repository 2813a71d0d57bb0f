/* The dose a measurement adds to its detector's accumulated dose, as one SQL
 * expression shared by the dose-limit rule, the detector view and the
 * reports (docs/rules.md): the corrected dose of a plausible result; for a
 * gross or implausible one (a unit slip can be a factor 1000) the planned
 * dose, the best estimate of what the detector received; NULL (nothing) when
 * no dose was computed. Private to src/store. */
#ifndef FXL_STORE_DOSE_COUNTED_H
#define FXL_STORE_DOSE_COUNTED_H

#define FXL_SQL_DOSE_COUNTED(m)                                                              \
    "(CASE WHEN " m ".corrected_dose_cgy IS NULL THEN NULL "                                 \
    "WHEN " m ".gross = 1 OR " m ".verdict = 'implausible' THEN coalesce(" m                  \
    ".expected_dose_cgy, 0) ELSE " m ".corrected_dose_cgy END)"

#endif
