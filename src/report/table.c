/* Streaming tables: a row is measured, placed, drawn and forgotten; a page
 * break repeats the caption ("continued") and the column headers. */
#include "report/table.h"

#include <stdio.h>
#include <string.h>

#define PAD_X 2.5
#define PAD_Y 2.5
#define HEADER_SIZE_DELTA 0.0

double rpt_table_width(const rpt_col *cols, int ncols)
{
    double w = 0;
    int i;

    for (i = 0; i < ncols; i++)
        w += cols[i].width;
    return w;
}

static double lead(const rpt_table *t)
{
    return t->size * 1.28;
}

static void draw_cell_lines(rpt_table *t, const rpt_col *c, double x, double top,
                            const rpt_lines *lines, HPDF_Font f, double r, double g, double b)
{
    rpt_doc *d = t->d;
    int i;

    for (i = 0; i < lines->n; i++) {
        double y = top - PAD_Y - t->size * 0.95 - lead(t) * i;
        double w = rpt_width(d, f, t->size, lines->line[i]);
        double tx = c->align == RPT_RIGHT ? x + c->width - PAD_X - w
                    : c->align == RPT_CENTER ? x + (c->width - w) / 2
                                             : x + PAD_X;
        rpt_text_rgb(d, f, t->size, r, g, b, tx, y, lines->line[i]);
    }
}

static void draw_header(rpt_table *t, int continued)
{
    rpt_doc *d = t->d;
    rpt_lines lines[RPT_TABLE_MAX_COLS];
    double x = d->left, h, width = rpt_table_width(t->cols, t->ncols);
    int i, maxn = 1;
    char cap[300];

    if (!t->caption[0] && !continued)
        d->y -= 3;
    if (t->caption[0]) {
        rpt_lines cl;
        int k;
        snprintf(cap, sizeof cap, "%s%s", t->caption, continued ? " (continued)" : "");
        rpt_wrap(d, d->bold, 9, cap, d->right - d->left, 2, &cl);
        for (k = 0; k < cl.n; k++)
            rpt_text(d, d->bold, 9, 0, d->left, d->y - 10 - 11.5 * k, cl.line[k]);
        d->y -= 15 + 11.5 * (cl.n - 1);
    }
    for (i = 0; i < t->ncols; i++) {
        rpt_wrap(d, d->bold, t->size, t->cols[i].title, t->cols[i].width - 2 * PAD_X, 2, &lines[i]);
        if (lines[i].n > maxn)
            maxn = lines[i].n;
    }
    h = maxn * lead(t) + 2 * PAD_Y;
    rpt_fill_rect(d, d->left, d->y - h, width, h, 0.86, 0.88, 0.90);
    for (i = 0; i < t->ncols; i++) {
        draw_cell_lines(t, &t->cols[i], x, d->y, &lines[i], d->bold, 0, 0, 0);
        x += t->cols[i].width;
    }
    rpt_line(d, d->left, d->y - h, d->left + width, d->y - h, 0.7, 0.25);
    d->y -= h;
    t->stripe = 0;
}

static void on_page(rpt_doc *d, void *arg)
{
    (void)d;
    draw_header(arg, 1);
}

void rpt_table_begin(rpt_table *t, rpt_doc *d, const rpt_col *cols, int ncols, double size,
                     int max_lines, const char *caption)
{
    double total, avail = d->right - d->left;
    int i;

    memset(t, 0, sizeof *t);
    t->d = d;
    t->ncols = ncols > RPT_TABLE_MAX_COLS ? RPT_TABLE_MAX_COLS : ncols;
    memcpy(t->cols, cols, (size_t)t->ncols * sizeof *cols);
    total = rpt_table_width(t->cols, t->ncols);
    if (total > avail)
        for (i = 0; i < t->ncols; i++)
            t->cols[i].width *= avail / total;
    t->size = size;
    t->max_lines = max_lines > 0 ? max_lines : 1;
    snprintf(t->caption, sizeof t->caption, "%s", caption ? caption : "");
    /* caption + a two-line header + two rows stay together */
    d->hook = NULL;
    rpt_need(d, (t->caption[0] ? 27 : 0) + 4 * lead(t) + 4 * PAD_Y + 2 * lead(t));
    draw_header(t, 0);
    d->hook = on_page;
    d->hook_arg = t;
}

void rpt_table_row(rpt_table *t, const char *const *cells, const rpt_row_style *style)
{
    rpt_doc *d = t->d;
    rpt_lines lines[RPT_TABLE_MAX_COLS];
    double x = d->left, h, width = rpt_table_width(t->cols, t->ncols);
    int i, maxn = 1;

    for (i = 0; i < t->ncols; i++) {
        HPDF_Font f = style && (style->bold_mask & (1u << i)) ? d->bold : d->font;
        rpt_wrap(d, f, t->size, cells[i] ? cells[i] : "", t->cols[i].width - 2 * PAD_X,
                 t->max_lines, &lines[i]);
        if (lines[i].n > maxn)
            maxn = lines[i].n;
    }
    h = maxn * lead(t) + 2 * PAD_Y;
    rpt_need(d, h);
    if (t->stripe++ % 2 == 1)
        rpt_fill_rect(d, d->left, d->y - h, width, h, 0.955, 0.955, 0.955);
    for (i = 0; i < t->ncols; i++) {
        HPDF_Font f = style && (style->bold_mask & (1u << i)) ? d->bold : d->font;
        if (style && (style->alert_mask & (1u << i)))
            draw_cell_lines(t, &t->cols[i], x, d->y, &lines[i], f, 0.62, 0.05, 0.05);
        else if (style && style->muted)
            draw_cell_lines(t, &t->cols[i], x, d->y, &lines[i], f, 0.45, 0.45, 0.45);
        else
            draw_cell_lines(t, &t->cols[i], x, d->y, &lines[i], f, 0, 0, 0);
        x += t->cols[i].width;
    }
    if (style && style->muted) {
        /* a superseded row is struck through, still readable */
        double ym = d->y - h / 2;
        rpt_line(d, d->left + 1, ym, d->left + width - 1, ym, 0.4, 0.55);
    }
    d->y -= h;
    t->rows++;
}

void rpt_table_note(rpt_table *t, const char *text)
{
    rpt_doc *d = t->d;
    double h = lead(t) + 2 * PAD_Y;

    rpt_need(d, h);
    rpt_text(d, d->font, t->size, 0.3, d->left + PAD_X, d->y - PAD_Y - t->size * 0.95, text);
    d->y -= h;
}

void rpt_table_end(rpt_table *t)
{
    rpt_doc *d = t->d;

    rpt_line(d, d->left, d->y, d->left + rpt_table_width(t->cols, t->ncols), d->y, 0.5, 0.5);
    d->hook = NULL;
    d->hook_arg = NULL;
    d->y -= 6;
}
