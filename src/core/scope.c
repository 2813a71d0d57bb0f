/* Scope matching of threshold sets: match, specificity, compatibility, ties
 * and the choice among candidates. Pure functions; rules in docs/levels.md. */
#include "fxl/scope.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

static int str_set(const char *s)
{
    return s && *s;
}

static int energy_set(double e)
{
    return isfinite(e) && e > 0;
}

static int ascii_lower(int c)
{
    return c >= 'A' && c <= 'Z' ? c - 'A' + 'a' : c;
}

/* Site and technique are typed by people in plans and in level sets; a
 * difference in case alone must not silently send a measurement to another
 * set. */
static int str_eq_nocase(const char *a, const char *b)
{
    while (*a && *b && ascii_lower((unsigned char)*a) == ascii_lower((unsigned char)*b)) {
        a++;
        b++;
    }
    return *a == '\0' && *b == '\0';
}

enum { COL_SITE, COL_TECHNIQUE, COL_MODALITY, COL_ENERGY, COL_POINT, COL_KIND, COL_COUNT };

static const char *col_text(const fxl_scope *s, int col)
{
    switch (col) {
    case COL_SITE: return s->site;
    case COL_TECHNIQUE: return s->technique;
    case COL_MODALITY: return s->modality;
    case COL_POINT: return s->point;
    case COL_KIND: return s->detector_kind;
    }
    return NULL;
}

static int col_set(const fxl_scope *s, int col)
{
    return col == COL_ENERGY ? energy_set(s->energy) : str_set(col_text(s, col));
}

/* Both columns set: do they hold the same value? */
static int col_equal(const fxl_scope *a, const fxl_scope *b, int col)
{
    if (col == COL_ENERGY)
        return fabs(a->energy - b->energy) <= FXL_SCOPE_ENERGY_EPS;
    if (col == COL_SITE || col == COL_TECHNIQUE)
        return str_eq_nocase(col_text(a, col), col_text(b, col));
    return strcmp(col_text(a, col), col_text(b, col)) == 0;
}

int fxl_scope_specificity(const fxl_scope *set)
{
    int col, n = 0;

    for (col = 0; col < COL_COUNT; col++)
        n += col_set(set, col);
    return n;
}

int fxl_scope_matches(const fxl_scope *set, const fxl_scope *measurement)
{
    int col;

    for (col = 0; col < COL_COUNT; col++) {
        if (!col_set(set, col))
            continue;
        if (!col_set(measurement, col) || !col_equal(set, measurement, col))
            return 0;
    }
    return 1;
}

int fxl_scope_compatible(const fxl_scope *a, const fxl_scope *b)
{
    int col;

    for (col = 0; col < COL_COUNT; col++)
        if (col_set(a, col) && col_set(b, col) && !col_equal(a, b, col))
            return 0;
    return 1;
}

int fxl_scope_identical(const fxl_scope *a, const fxl_scope *b)
{
    int col;

    for (col = 0; col < COL_COUNT; col++) {
        if (col_set(a, col) != col_set(b, col))
            return 0;
        if (col_set(a, col) && !col_equal(a, b, col))
            return 0;
    }
    return 1;
}

int fxl_scope_ties(const fxl_scope *a, const fxl_scope *b)
{
    return fxl_scope_specificity(a) == fxl_scope_specificity(b) && fxl_scope_compatible(a, b);
}

void fxl_scope_intersection(fxl_scope *out, const fxl_scope *a, const fxl_scope *b)
{
    out->site = str_set(a->site) ? a->site : b->site;
    out->technique = str_set(a->technique) ? a->technique : b->technique;
    out->modality = str_set(a->modality) ? a->modality : b->modality;
    out->energy = energy_set(a->energy) ? a->energy : b->energy;
    out->point = str_set(a->point) ? a->point : b->point;
    out->detector_kind = str_set(a->detector_kind) ? a->detector_kind : b->detector_kind;
}

void fxl_scope_describe(char *buf, size_t size, const fxl_scope *s)
{
    static const char *const label[COL_COUNT] = {"site", "technique", "modality", "energy",
                                                 "point", "detector kind"};
    size_t used = 0;
    int col, n = 0;

    if (size == 0)
        return;
    buf[0] = '\0';
    for (col = 0; col < COL_COUNT; col++) {
        int w;
        if (!col_set(s, col))
            continue;
        if (col == COL_ENERGY)
            w = snprintf(buf + used, size - used, "%s%s %g", n ? ", " : "", label[col], s->energy);
        else
            w = snprintf(buf + used, size - used, "%s%s '%s'", n ? ", " : "", label[col],
                         col_text(s, col));
        if (w < 0 || (size_t)w >= size - used)
            return;  /* truncated, still NUL-terminated */
        used += (size_t)w;
        n++;
    }
    if (n == 0)
        snprintf(buf, size, "any measurement");
}

int fxl_scope_choose(size_t *out_index, size_t *out_other, const fxl_scope *sets, size_t n,
                     const fxl_scope *measurement)
{
    size_t i, best = 0, other = 0;
    int best_spec = -1, tied = 0;

    for (i = 0; i < n; i++) {
        int spec;
        if (!fxl_scope_matches(&sets[i], measurement))
            continue;
        spec = fxl_scope_specificity(&sets[i]);
        if (spec > best_spec) {
            best_spec = spec;
            best = i;
            tied = 0;
        } else if (spec == best_spec && !tied) {
            other = i;
            tied = 1;
        }
    }
    if (best_spec < 0)
        return FXL_ENOTFOUND;
    *out_index = best;
    if (tied) {
        if (out_other)
            *out_other = other;
        return FXL_ECONFLICT;
    }
    return 0;
}
