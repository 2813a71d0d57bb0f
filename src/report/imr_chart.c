/* I-MR charts: individuals with centre and limits, moving ranges with their
 * average and upper limit; shape as well as colour marks a point beyond a
 * limit, so a black-and-white copy still reads. */
#include "report/imr_chart.h"

#include <math.h>
#include <stdio.h>

#include "report/chart.h"

typedef struct panel {
    double x, y, w, h, ymin, ymax;
    size_t n;
} panel;

static double ppx(const panel *p, size_t i)
{
    return p->n > 1 ? p->x + 6 + (double)i / (double)(p->n - 1) * (p->w - 12) : p->x + p->w / 2;
}

static double ppy(const panel *p, double v)
{
    if (v > p->ymax)
        v = p->ymax;
    if (v < p->ymin)
        v = p->ymin;
    return p->y + (v - p->ymin) / (p->ymax - p->ymin) * p->h;
}

static void ticks(rpt_doc *d, const panel *p, int sign)
{
    double step = rpt_nice_step(p->ymax - p->ymin, 5), v;
    char buf[32];

    for (v = ceil(p->ymin / step) * step; v <= p->ymax + 1e-9; v += step) {
        double y = ppy(p, v);
        rpt_line(d, p->x - 2.5, y, p->x, y, 0.5, 0.3);
        if (fabs(v) < 1e-9)
            snprintf(buf, sizeof buf, "0");
        else
            snprintf(buf, sizeof buf, sign ? "%+g" : "%g", v);
        rpt_text_right(d, d->font, 6, 0.2, p->x - 4, y - 2, buf);
    }
}

static void hline(rpt_doc *d, const panel *p, double v, int dashed, double r, double g,
                  double b, const char *label)
{
    double y, tw;

    if (!isfinite(v) || v < p->ymin || v > p->ymax)
        return;
    y = ppy(p, v);
    rpt_dash_line(d, p->x, y, p->x + p->w, y, dashed ? 0.8 : 0.7, r, g, b, dashed ? 3 : 0, 2);
    if (label) {
        tw = rpt_width(d, d->font, 5.5, label);
        rpt_fill_rect(d, p->x + p->w - tw - 3, y + 1, tw + 2, 6.4, 1, 1, 1);
        rpt_text_rgb(d, d->font, 5.5, r, g, b, p->x + p->w - tw - 2, y + 2.2, label);
    }
}

static void dot(rpt_doc *d, double x, double y, int beyond)
{
    if (beyond)
        rpt_fill_rect(d, x - 2.4, y - 2.4, 4.8, 4.8, 0.65, 0.08, 0.08);
    else
        rpt_fill_rect(d, x - 1.6, y - 1.6, 3.2, 3.2, 0.15, 0.25, 0.40);
}

static void range_of(double *lo, double *hi, double v)
{
    if (!isfinite(v))
        return;
    if (v < *lo)
        *lo = v;
    if (v > *hi)
        *hi = v;
}

void rpt_imr_draw(rpt_doc *d, double x, double top, double w, double h, const char *title,
                  const double *v, size_t n, const fxl_imr *c, double tol, double act)
{
    panel ip, mp;
    double lo = -1, hi = 1, mrmax = 1, pad;
    char buf[300];
    size_t i;

    rpt_fit(d, d->bold, 8, title, w, buf, sizeof buf);
    rpt_text(d, d->bold, 8, 0, x, top - 9, buf);
    ip.x = mp.x = x + 30;
    ip.w = mp.w = w - 34;
    ip.n = n;
    mp.n = n;
    ip.h = (h - 40) * 0.62;
    mp.h = (h - 40) * 0.38 - 10;
    ip.y = top - 16 - ip.h;
    mp.y = ip.y - 12 - mp.h;

    for (i = 0; i < n; i++)
        range_of(&lo, &hi, v[i]);
    range_of(&lo, &hi, c->ucl);
    range_of(&lo, &hi, c->lcl);
    if (isfinite(tol) && tol < 3 * (hi - lo)) {
        range_of(&lo, &hi, tol);
        range_of(&lo, &hi, -tol);
    }
    pad = (hi - lo) * 0.08;
    ip.ymin = lo - pad;
    ip.ymax = hi + pad;
    for (i = 1; i < n; i++)
        if (fabs(v[i] - v[i - 1]) > mrmax)
            mrmax = fabs(v[i] - v[i - 1]);
    if (isfinite(c->mr_ucl) && c->mr_ucl > mrmax)
        mrmax = c->mr_ucl;
    mp.ymin = 0;
    mp.ymax = mrmax * 1.1;

    /* individuals */
    rpt_fill_rect(d, ip.x, ip.y, ip.w, ip.h, 1, 1, 1);
    rpt_text(d, d->font, 6, 0.3, x, ip.y + ip.h + 2, "deviation (%)");
    if (isfinite(tol)) {
        hline(d, &ip, tol, 0, 0.72, 0.72, 0.72, NULL);
        hline(d, &ip, -tol, 0, 0.72, 0.72, 0.72, NULL);
    }
    if (isfinite(act)) {
        hline(d, &ip, act, 0, 0.55, 0.55, 0.55, NULL);
        hline(d, &ip, -act, 0, 0.55, 0.55, 0.55, NULL);
    }
    snprintf(buf, sizeof buf, "centre %+.3f", c->centre);
    hline(d, &ip, c->centre, 0, 0.1, 0.3, 0.1, buf);
    snprintf(buf, sizeof buf, "UCL %+.3f", c->ucl);
    hline(d, &ip, c->ucl, 1, 0.65, 0.1, 0.1, buf);
    snprintf(buf, sizeof buf, "LCL %+.3f", c->lcl);
    hline(d, &ip, c->lcl, 1, 0.65, 0.1, 0.1, buf);
    for (i = 1; i < n; i++)
        rpt_line(d, ppx(&ip, i - 1), ppy(&ip, v[i - 1]), ppx(&ip, i), ppy(&ip, v[i]), 0.5, 0.45);
    for (i = 0; i < n; i++)
        dot(d, ppx(&ip, i), ppy(&ip, v[i]), isfinite(c->ucl) && (v[i] > c->ucl || v[i] < c->lcl));
    rpt_stroke_rect(d, ip.x, ip.y, ip.w, ip.h, 0.6, 0.3);
    ticks(d, &ip, 1);

    /* moving ranges */
    rpt_fill_rect(d, mp.x, mp.y, mp.w, mp.h, 1, 1, 1);
    rpt_text(d, d->font, 6, 0.3, x, mp.y + mp.h + 2, "moving range (%)");
    snprintf(buf, sizeof buf, "average %.3f", c->mr_mean);
    hline(d, &mp, c->mr_mean, 0, 0.1, 0.3, 0.1, buf);
    snprintf(buf, sizeof buf, "UCL %.3f", c->mr_ucl);
    hline(d, &mp, c->mr_ucl, 1, 0.65, 0.1, 0.1, buf);
    for (i = 2; i < n; i++)
        rpt_line(d, ppx(&mp, i - 1), ppy(&mp, fabs(v[i - 1] - v[i - 2])), ppx(&mp, i),
                 ppy(&mp, fabs(v[i] - v[i - 1])), 0.5, 0.45);
    for (i = 1; i < n; i++) {
        double r = fabs(v[i] - v[i - 1]);
        dot(d, ppx(&mp, i), ppy(&mp, r), isfinite(c->mr_ucl) && r > c->mr_ucl);
    }
    rpt_stroke_rect(d, mp.x, mp.y, mp.w, mp.h, 0.6, 0.3);
    ticks(d, &mp, 0);
    snprintf(buf, sizeof buf, "results in order of treatment (%zu)", n);
    rpt_text_center(d, d->font, 6, 0.2, mp.x + mp.w / 2, mp.y - 9, buf);
}
