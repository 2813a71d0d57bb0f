/* Deviation charts and histograms: axes with round ticks, the tolerance and
 * action bands, markers whose shape (not only colour) tells the verdict so a
 * black-and-white print still reads. */
#include "report/chart.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

/* Band colours: pale green inside tolerance, pale amber between tolerance
 * and action level, pale red beyond the action level. */
static const double BAND_IN[3] = {0.90, 0.96, 0.90};
static const double BAND_TOL[3] = {1.00, 0.94, 0.80};
static const double BAND_ACT[3] = {0.99, 0.87, 0.87};

enum { MK_WITHIN = 0, MK_TOL, MK_ACT };

double rpt_nice_step(double range, int max_ticks)
{
    static const double mult[] = {1, 2, 5};
    double p;
    int i;

    if (!(range > 0) || max_ticks < 1)
        return 1;
    for (p = pow(10, floor(log10(range / max_ticks)) - 1); p < 1e9; p *= 10)
        for (i = 0; i < 3; i++)
            if (range / (mult[i] * p) <= max_ticks)
                return mult[i] * p;
    return range;
}

static double px(const rpt_axes *a, double v)
{
    return a->x + (v - a->xmin) / (a->xmax - a->xmin) * a->w;
}

static double py(const rpt_axes *a, double v)
{
    return a->y + (v - a->ymin) / (a->ymax - a->ymin) * a->h;
}

static void band(rpt_doc *d, const rpt_axes *a, double lo, double hi, const double rgb[3],
                 int vertical)
{
    double l, h;

    if (vertical) {
        l = fmax(lo, a->xmin);
        h = fmin(hi, a->xmax);
        if (h > l)
            rpt_fill_rect(d, px(a, l), a->y, px(a, h) - px(a, l), a->h, rgb[0], rgb[1], rgb[2]);
    } else {
        l = fmax(lo, a->ymin);
        h = fmin(hi, a->ymax);
        if (h > l)
            rpt_fill_rect(d, a->x, py(a, l), a->w, py(a, h) - py(a, l), rgb[0], rgb[1], rgb[2]);
    }
}

/* Bands symmetric around 0 along y (vertical == 0) or along x. */
static void bands(rpt_doc *d, const rpt_axes *a, double tol, double act, int vertical)
{
    double big = 1e6;

    if (!isfinite(tol) || !isfinite(act))
        return;
    band(d, a, -big, -act, BAND_ACT, vertical);
    band(d, a, act, big, BAND_ACT, vertical);
    band(d, a, -act, -tol, BAND_TOL, vertical);
    band(d, a, tol, act, BAND_TOL, vertical);
    band(d, a, -tol, tol, BAND_IN, vertical);
}

static void level_lines(rpt_doc *d, const rpt_axes *a, double tol, double act, int vertical)
{
    const double v[4] = {-act, -tol, tol, act};
    char buf[32];
    int i;

    if (!isfinite(tol) || !isfinite(act))
        return;
    for (i = 0; i < 4; i++) {
        int is_act = (i == 0 || i == 3);
        double r = is_act ? 0.65 : 0.70, g = is_act ? 0.10 : 0.45, b = is_act ? 0.10 : 0.05;
        if (vertical) {
            if (v[i] <= a->xmin || v[i] >= a->xmax)
                continue;
            rpt_dash_line(d, px(a, v[i]), a->y, px(a, v[i]), a->y + a->h, 0.7, r, g, b, 3, 2);
        } else {
            if (v[i] <= a->ymin || v[i] >= a->ymax)
                continue;
            rpt_dash_line(d, a->x, py(a, v[i]), a->x + a->w, py(a, v[i]), 0.7, r, g, b, 3, 2);
            /* label at the right end, just inside the band it bounds */
            snprintf(buf, sizeof buf, "%s %+g %%", is_act ? "action" : "tol.", v[i]);
            {
                double tw = rpt_width(d, d->font, 5.5, buf);
                double ty = v[i] > 0 ? py(a, v[i]) + 1.8 : py(a, v[i]) - 6.3;
                rpt_fill_rect(d, a->x + a->w - tw - 3, ty - 1.2, tw + 2, 6.6, 1, 1, 1);
                rpt_text_rgb(d, d->font, 5.5, r, g, b, a->x + a->w - tw - 2, ty, buf);
            }
        }
    }
}

static void marker(rpt_doc *d, double x, double y, int kind)
{
    HPDF_Page p = d->page;

    if (!p)
        return;
    HPDF_Page_SetLineWidth(p, 0.6);
    HPDF_Page_SetRGBStroke(p, 1, 1, 1);
    switch (kind) {
    case MK_ACT:  /* square, dark red */
        HPDF_Page_SetRGBFill(p, 0.65, 0.08, 0.08);
        HPDF_Page_Rectangle(p, (HPDF_REAL)(x - 2.6), (HPDF_REAL)(y - 2.6), 5.2f, 5.2f);
        break;
    case MK_TOL:  /* triangle, dark amber */
        HPDF_Page_SetRGBFill(p, 0.78, 0.45, 0.0);
        HPDF_Page_MoveTo(p, (HPDF_REAL)x, (HPDF_REAL)(y + 3.2));
        HPDF_Page_LineTo(p, (HPDF_REAL)(x - 3.0), (HPDF_REAL)(y - 2.2));
        HPDF_Page_LineTo(p, (HPDF_REAL)(x + 3.0), (HPDF_REAL)(y - 2.2));
        HPDF_Page_ClosePath(p);
        break;
    default:      /* circle, dark blue-grey */
        HPDF_Page_SetRGBFill(p, 0.15, 0.25, 0.40);
        HPDF_Page_Circle(p, (HPDF_REAL)x, (HPDF_REAL)y, 2.3f);
        break;
    }
    HPDF_Page_FillStroke(p);
    HPDF_Page_SetRGBFill(p, 0, 0, 0);
    HPDF_Page_SetRGBStroke(p, 0, 0, 0);
}

static int marker_kind(const char *verdict)
{
    if (verdict && strcmp(verdict, "outside_action") == 0)
        return MK_ACT;
    if (verdict && strcmp(verdict, "outside_tolerance") == 0)
        return MK_TOL;
    return MK_WITHIN;
}

static void y_ticks(rpt_doc *d, const rpt_axes *a, double step, const char *unit, int with_sign)
{
    char buf[32];
    double v;

    for (v = ceil(a->ymin / step) * step; v <= a->ymax + 1e-9; v += step) {
        double y = py(a, v);
        rpt_line(d, a->x - 2.5, y, a->x, y, 0.5, 0.3);
        if (fabs(v) < 1e-9)
            snprintf(buf, sizeof buf, "0%s", unit);  /* unit carries its space */
        else
            snprintf(buf, sizeof buf, with_sign ? "%+g%s" : "%g%s", v, unit);
        rpt_text_right(d, d->font, 6, 0.2, a->x - 4, y - 2, buf);
    }
}

void rpt_devchart_begin(rpt_devchart *c, rpt_doc *d, double x, double top, double w, double h,
                        const char *title, const char *subtitle, int max_fraction,
                        double max_abs_dev, double tol, double act)
{
    rpt_axes *a = &c->ax;
    double range, ystep, xstep, v;
    char buf[300];

    memset(c, 0, sizeof *c);
    c->d = d;
    rpt_fit(d, d->bold, 8.5, title, w, buf, sizeof buf);
    rpt_text(d, d->bold, 8.5, 0, x, top - 9, buf);
    rpt_fit(d, d->font, 7, subtitle, w, buf, sizeof buf);
    rpt_text(d, d->font, 7, 0.3, x, top - 19, buf);

    a->x = x + 34;
    a->w = w - 40;
    a->y = top - h + 24;
    a->h = h - 24 - 38;
    if (max_fraction < 1)
        max_fraction = 1;
    a->xmin = 0.5;
    a->xmax = max_fraction + 0.5;
    range = 2.0;
    if (isfinite(act) && act * 1.4 > range)
        range = act * 1.4;
    if (isfinite(max_abs_dev) && max_abs_dev * 1.1 > range)
        range = max_abs_dev * 1.1;
    ystep = rpt_nice_step(2 * range, 8);
    range = ceil(range / ystep) * ystep;
    a->ymin = -range;
    a->ymax = range;

    rpt_fill_rect(d, a->x, a->y, a->w, a->h, 1, 1, 1);
    bands(d, a, tol, act, 0);
    rpt_line(d, a->x, py(a, 0), a->x + a->w, py(a, 0), 0.6, 0.45);
    level_lines(d, a, tol, act, 0);
    rpt_stroke_rect(d, a->x, a->y, a->w, a->h, 0.6, 0.3);
    y_ticks(d, a, ystep, " %", 1);

    xstep = rpt_nice_step(max_fraction, 12);
    if (xstep < 1)
        xstep = 1;
    for (v = xstep > 1 ? xstep : 1; v <= max_fraction + 1e-9; v += xstep) {
        double xx = px(a, v);
        rpt_line(d, xx, a->y - 2.5, xx, a->y, 0.5, 0.3);
        snprintf(buf, sizeof buf, "%g", v);
        rpt_text_center(d, d->font, 6, 0.2, xx, a->y - 9, buf);
    }
    rpt_text_center(d, d->font, 6.5, 0.2, a->x + a->w / 2, a->y - 18, "fraction number");
    rpt_text(d, d->font, 6.5, 0.2, x, a->y + a->h + 5, "deviation (%)");
}

void rpt_devchart_point(rpt_devchart *c, int fraction, double dev_pct, const char *verdict)
{
    const rpt_axes *a = &c->ax;
    double x = px(a, fraction), y, v = dev_pct;
    int kind = marker_kind(verdict);

    if (!isfinite(v))
        return;
    if (v > a->ymax)
        v = a->ymax;
    if (v < a->ymin)
        v = a->ymin;
    y = py(a, v);
    if (c->have_prev) {
        rpt_line(c->d, c->prev_x, c->prev_y, x, y, 0.5, 0.45);
        marker(c->d, c->prev_x, c->prev_y, c->prev_kind);
    }
    marker(c->d, x, y, kind);
    c->have_prev = 1;
    c->prev_x = x;
    c->prev_y = y;
    c->prev_kind = kind;
    c->n++;
}

void rpt_devchart_end(rpt_devchart *c)
{
    const rpt_axes *a = &c->ax;

    if (c->n == 0)
        rpt_text_center(c->d, c->d->font, 7.5, 0.3, a->x + a->w / 2, a->y + a->h / 2 - 3,
                        "no result judged against levels");
}

void rpt_chart_legend(rpt_doc *d, double x, double y)
{
    static const char *const words[3] = {"within tolerance", "outside tolerance",
                                         "outside action level"};
    const double *band_rgb[3] = {BAND_IN, BAND_TOL, BAND_ACT};
    static const char *const band_words[3] = {"tolerance band", "between tolerance and action",
                                              "beyond action level"};
    int i;

    for (i = 0; i < 3; i++) {
        marker(d, x + 3, y + 2.5, i);
        rpt_text(d, d->font, 7, 0.15, x + 9, y, words[i]);
        x += 14 + rpt_width(d, d->font, 7, words[i]);
    }
    x += 10;
    for (i = 0; i < 3; i++) {
        rpt_fill_rect(d, x, y - 1, 10, 7, band_rgb[i][0], band_rgb[i][1], band_rgb[i][2]);
        rpt_stroke_rect(d, x, y - 1, 10, 7, 0.3, 0.6);
        rpt_text(d, d->font, 7, 0.15, x + 13, y, band_words[i]);
        x += 20 + rpt_width(d, d->font, 7, band_words[i]);
    }
}

/* ---- histogram ------------------------------------------------------------------ */

void rpt_hist_init(rpt_hist *h, double range)
{
    memset(h, 0, sizeof *h);
    if (!(range > 0))
        range = 10;
    h->nbins = 20;
    h->bin = 2 * range / h->nbins;
    h->lo = -range;
}

static int divides(double level, double bin)
{
    double k = level / bin;

    return fabs(k - floor(k + 0.5)) < 1e-9;
}

int rpt_hist_init_aligned(rpt_hist *h, double range, double tol, double act)
{
    static const double widths[] = {5, 2.5, 2, 1, 0.5, 0.25, 0.2, 0.1};
    size_t i;

    if (!isfinite(tol) || !isfinite(act) || !(tol > 0) || !(act >= tol) || !(range > 0))
        return -1;
    for (i = 0; i < sizeof widths / sizeof widths[0]; i++) {
        double w = widths[i], r = ceil(range / w - 1e-9) * w;
        if (!divides(tol, w) || !divides(act, w) || act / w < 3 - 1e-9)
            continue;
        if (2 * r / w > RPT_HIST_BINS + 1e-9)
            r = RPT_HIST_BINS / 2 * w;
        if (r <= act + 1e-9)
            continue;        /* the action level must lie inside the axis */
        memset(h, 0, sizeof *h);
        h->bin = w;
        h->nbins = (int)floor(2 * r / w + 0.5);
        h->lo = -r;
        h->aligned = 1;
        return 0;
    }
    return -1;
}

void rpt_hist_add(rpt_hist *h, double v)
{
    double k;

    if (!isfinite(v))
        return;
    h->n++;
    /* Bins are closed on the side towards zero, so a deviation exactly at a
     * level lands inside it, as the verdict counts it. */
    k = v > 0 ? ceil((v - h->lo) / h->bin) - 1 : floor((v - h->lo) / h->bin);
    if (k < 0)
        h->under++;
    else if (k >= h->nbins)
        h->over++;
    else
        h->count[(int)k]++;
}

void rpt_hist_draw(rpt_doc *d, const rpt_hist *h, double x, double top, double w, double ht,
                   double tol, double act)
{
    rpt_axes a;
    long maxc = 1;
    double ystep, v, xstep;
    char buf[64];
    int i;

    for (i = 0; i < h->nbins; i++)
        if (h->count[i] > maxc)
            maxc = h->count[i];
    a.x = x + 34;
    a.w = w - 44;
    a.y = top - ht + 26;
    a.h = ht - 26 - 22;
    a.xmin = h->lo;
    a.xmax = h->lo + h->nbins * h->bin;
    ystep = rpt_nice_step((double)maxc, 6);
    if (ystep < 1)
        ystep = 1;
    a.ymin = 0;
    a.ymax = ceil(maxc * 1.15 / ystep) * ystep;
    if (a.ymax < maxc + 0.5)
        a.ymax += ystep;

    rpt_fill_rect(d, a.x, a.y, a.w, a.h, 1, 1, 1);
    bands(d, &a, tol, act, 1);
    for (i = 0; i < h->nbins; i++) {
        double x0 = px(&a, h->lo + i * h->bin), x1 = px(&a, h->lo + (i + 1) * h->bin);
        if (h->count[i] == 0)
            continue;
        rpt_fill_rect(d, x0 + 0.8, a.y, x1 - x0 - 1.6, py(&a, (double)h->count[i]) - a.y,
                      0.25, 0.33, 0.45);
        snprintf(buf, sizeof buf, "%ld", h->count[i]);
        rpt_text_center(d, d->font, 6, 0.1, (x0 + x1) / 2, py(&a, (double)h->count[i]) + 2, buf);
    }
    level_lines(d, &a, tol, act, 1);
    rpt_line(d, px(&a, 0), a.y, px(&a, 0), a.y + a.h, 0.5, 0.45);
    rpt_stroke_rect(d, a.x, a.y, a.w, a.h, 0.6, 0.3);
    y_ticks(d, &a, ystep, "", 0);
    xstep = rpt_nice_step(a.xmax - a.xmin, 10);
    for (v = ceil(a.xmin / xstep) * xstep; v <= a.xmax + 1e-9; v += xstep) {
        double xx = px(&a, v);
        rpt_line(d, xx, a.y - 2.5, xx, a.y, 0.5, 0.3);
        snprintf(buf, sizeof buf, fabs(v) < 1e-9 ? "0 %%" : "%+g %%", v);
        rpt_text_center(d, d->font, 6, 0.2, xx, a.y - 9, buf);
    }
    rpt_text_center(d, d->font, 6.5, 0.2, a.x + a.w / 2, a.y - 19,
                    "deviation of measured from expected dose (%)");
    rpt_text(d, d->font, 6.5, 0.2, x, a.y + a.h + 4, "results");
    if (h->under || h->over) {
        snprintf(buf, sizeof buf, "off scale: %ld below %+g %%, %ld at or above %+g %%", h->under,
                 a.xmin, h->over, a.xmax);
        rpt_text_right(d, d->font, 6.5, 0.2, a.x + a.w, a.y + a.h + 4, buf);
    }
}
