/* The trend chart: deviation (percent) per fraction as inline SVG, with the
 * tolerance band and the action lines drawn from the levels that judged the
 * results. Each marker's shape follows the verdict as the badges do (circle
 * within, triangle outside tolerance, square outside action, a cross on the
 * axis for not evaluable), and each carries its own text as a <title>.
 * No script: the page's table lists the same numbers. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "web/web.h"

#define W 900.0
#define H 300.0
#define ML 56.0
#define MR 16.0
#define MT 16.0
#define MB 40.0

void web_chart(web_buf *b, const char *title, const web_chart_point *pts, size_t n,
               double tolerance_pct, double action_pct)
{
    double xmin = 1, xmax = 1, ylim = 5;
    size_t i;

    for (i = 0; i < n; i++) {
        if (i == 0 || pts[i].x < xmin)
            xmin = pts[i].x;
        if (i == 0 || pts[i].x > xmax)
            xmax = pts[i].x;
        if (isfinite(pts[i].y) && fabs(pts[i].y) > ylim)
            ylim = fabs(pts[i].y);
    }
    if (isfinite(action_pct) && action_pct * 1.25 > ylim)
        ylim = action_pct * 1.25;
    if (isfinite(tolerance_pct) && tolerance_pct * 1.25 > ylim)
        ylim = tolerance_pct * 1.25;
    ylim = ceil(ylim * 1.1);
    if (xmax <= xmin)
        xmax = xmin + 1;

#define PX(x) (ML + ((x) - (xmin - 0.5)) / ((xmax + 0.5) - (xmin - 0.5)) * (W - ML - MR))
#define PY(y) (MT + (ylim - (y)) / (2 * ylim) * (H - MT - MB))

    web_printf(b, "<figure class=\"chart\"><svg viewBox=\"0 0 900 300\" role=\"img\" aria-label=\"%a\" "
                  "xmlns=\"http://www.w3.org/2000/svg\">\n<title>%h</title>\n",
               title, title);
    /* bands: tolerance shaded, action as dashed lines */
    if (isfinite(tolerance_pct))
        web_printf(b, "<rect x=\"%.1f\" y=\"%.1f\" width=\"%.1f\" height=\"%.1f\" fill=\"#e4efe7\"/>\n", ML,
                   PY(tolerance_pct), W - ML - MR, PY(-tolerance_pct) - PY(tolerance_pct));
    {
        double t;
        double step = ylim <= 10 ? 2 : ylim <= 25 ? 5 : ylim <= 60 ? 10 : 25;
        for (t = -floor(ylim / step) * step; t <= ylim + 1e-9; t += step) {
            web_printf(b, "<line x1=\"%.1f\" x2=\"%.1f\" y1=\"%.1f\" y2=\"%.1f\" stroke=\"%s\" stroke-width=\"1\"/>"
                          "<text x=\"%.1f\" y=\"%.1f\" font-size=\"12\" text-anchor=\"end\">%.0f %%</text>\n",
                       ML, W - MR, PY(t), PY(t), fabs(t) < 1e-9 ? "#27323f" : "#dedad0", ML - 6, PY(t) + 4, t);
        }
    }
    if (isfinite(tolerance_pct))
        web_printf(b, "<text x=\"%.1f\" y=\"%.1f\" font-size=\"12\" fill=\"#2f6b4f\">tolerance \xC2\xB1%.1f %%</text>\n",
                   ML + 6, PY(tolerance_pct) + 14, tolerance_pct);
    if (isfinite(action_pct)) {
        web_printf(b, "<line x1=\"%.1f\" x2=\"%.1f\" y1=\"%.1f\" y2=\"%.1f\" stroke=\"#9b1c14\" stroke-width=\"2\" "
                      "stroke-dasharray=\"8 5\"/>\n<line x1=\"%.1f\" x2=\"%.1f\" y1=\"%.1f\" y2=\"%.1f\" "
                      "stroke=\"#9b1c14\" stroke-width=\"2\" stroke-dasharray=\"8 5\"/>\n"
                      "<text x=\"%.1f\" y=\"%.1f\" font-size=\"12\" fill=\"#9b1c14\">action \xC2\xB1%.1f %%</text>\n",
                   ML, W - MR, PY(action_pct), PY(action_pct), ML, W - MR, PY(-action_pct), PY(-action_pct),
                   ML + 6, PY(action_pct) - 4, action_pct);
    }
    if (!isfinite(tolerance_pct) && !isfinite(action_pct))
        web_printf(b, "<text x=\"%.1f\" y=\"%.1f\" font-size=\"13\">no levels known: no bands drawn</text>\n",
                   ML + 6, MT + 14);
    /* x axis labels: at most about 15 */
    {
        double step = ceil((xmax - xmin + 1) / 15.0), x;
        if (step < 1)
            step = 1;
        for (x = xmin; x <= xmax + 1e-9; x += step)
            web_printf(b, "<text x=\"%.1f\" y=\"%.1f\" font-size=\"12\" text-anchor=\"middle\">%.0f</text>\n",
                       PX(x), H - MB + 16, x);
        web_printf(b, "<text x=\"%.1f\" y=\"%.1f\" font-size=\"12\" text-anchor=\"middle\">fraction</text>\n",
                   (ML + W - MR) / 2, H - 6);
    }
    for (i = 0; i < n; i++) {
        const web_chart_point *p = &pts[i];
        const char *v = p->verdict ? p->verdict : "";
        const char *fill = p->superseded ? "none" : "#1d2733";
        double x = PX(p->x), y;
        web_printf(b, "<g class=\"pt%s\"><title>%h</title>", p->highlight ? " this" : "", p->label ? p->label : "");
        if (!isfinite(p->y)) {
            y = H - MB - 4;
            web_printf(b, "<path d=\"M%.1f %.1fl8 8m0 -8l-8 8\" stroke=\"#1d2733\" stroke-width=\"2\"/>", x - 4,
                       y - 8);
        } else {
            y = PY(p->y);
            if (strcmp(v, "outside_action") == 0 || strcmp(v, "implausible") == 0)
                web_printf(b, "<rect x=\"%.1f\" y=\"%.1f\" width=\"11\" height=\"11\" fill=\"%s\" stroke=\"#9b1c14\" "
                              "stroke-width=\"2\"/>",
                           x - 5.5, y - 5.5, p->superseded ? "none" : "#9b1c14");
            else if (strcmp(v, "outside_tolerance") == 0)
                web_printf(b, "<path d=\"M%.1f %.1fl6.5 11h-13z\" fill=\"%s\" stroke=\"#8a5a00\" stroke-width=\"2\"/>", x,
                           y - 7, p->superseded ? "none" : "#8a5a00");
            else
                web_printf(b, "<circle cx=\"%.1f\" cy=\"%.1f\" r=\"5\" fill=\"%s\" stroke=\"#1d2733\" stroke-width=\"2\"/>",
                           x, y, fill);
        }
        if (p->highlight)
            web_printf(b, "<circle cx=\"%.1f\" cy=\"%.1f\" r=\"11\" fill=\"none\" stroke=\"#2f5d8a\" stroke-width=\"2\"/>", x,
                       isfinite(p->y) ? y : y - 4);
        web_printf(b, "</g>\n");
    }
    web_printf(b, "</svg><figcaption>Deviation from the expected dose per fraction, percent. Circle: within "
                  "tolerance; triangle: outside tolerance; square: outside the action level; cross on the axis: "
                  "not evaluable; hollow: superseded by an amendment; ringed: this item.</figcaption></figure>\n");
#undef PX
#undef PY
}
