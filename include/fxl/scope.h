/* Scope matching of threshold sets: which sets could apply to a measurement,
 * how specific each is, and when two are tied. Pure functions (src/core),
 * no I/O. Rules: docs/levels.md. */
#ifndef FXL_SCOPE_H
#define FXL_SCOPE_H

#include <stddef.h>

#include "fxl/thresholds.h"

/* Tolerance on energy equality, MV or MeV. */
#define FXL_SCOPE_ENERGY_EPS 1e-6

/* Number of scope columns a set restricts (0 to 6). NULL or empty strings
 * and a non-finite or non-positive energy are open columns. */
int fxl_scope_specificity(const fxl_scope *set);

/* 1 when every restricted column of `set` equals the measurement's value:
 * site and technique compare ASCII case-insensitively, the enumerated columns
 * exactly, energy within FXL_SCOPE_ENERGY_EPS. A column the measurement does
 * not know (NULL / NaN) matches only an open column. */
int fxl_scope_matches(const fxl_scope *set, const fxl_scope *measurement);

/* 1 when some measurement could match both sets: no column is restricted by
 * both with different values. */
int fxl_scope_compatible(const fxl_scope *a, const fxl_scope *b);

/* 1 when both sets restrict exactly the same columns to the same values. */
int fxl_scope_identical(const fxl_scope *a, const fxl_scope *b);

/* 1 when a and b would tie: equally specific and compatible, so a
 * measurement exists that both match with nothing to choose between them. */
int fxl_scope_ties(const fxl_scope *a, const fxl_scope *b);

/* The intersection of two compatible scopes (every column restricted by
 * either), for messages. Strings are borrowed from a and b. */
void fxl_scope_intersection(fxl_scope *out, const fxl_scope *a, const fxl_scope *b);

/* Describes a scope in words into buf, e.g. "site 'Breast', energy 6" or
 * "any measurement" when nothing is restricted. */
void fxl_scope_describe(char *buf, size_t size, const fxl_scope *s);

/* Picks among n candidate sets (already the versions in force) the one for
 * `measurement`: the matching set with the most restricted columns.
 * Returns 0 with *out_index set; FXL_ENOTFOUND when none matches;
 * FXL_ECONFLICT when two matching sets share the highest specificity, with
 * *out_index and *out_other naming the first two such sets (by index). */
int fxl_scope_choose(size_t *out_index, size_t *out_other, const fxl_scope *sets, size_t n,
                     const fxl_scope *measurement);

#endif
