/* Tables in the PDF reports: fixed columns, cells wrapped (and cut with a
 * mark past their line limit), rows drawn as they stream in, and on every
 * page break the caption and the column headers drawn again. Private to
 * src/report. */
#ifndef FXL_REPORT_TABLE_H
#define FXL_REPORT_TABLE_H

#include "report/layout.h"

enum { RPT_LEFT = 0, RPT_RIGHT, RPT_CENTER };

typedef struct rpt_col {
    const char *title;       /* may wrap to two lines */
    double width;            /* points */
    int align;
} rpt_col;

/* How one row looks. Bit i of a mask is column i. */
typedef struct rpt_row_style {
    unsigned bold_mask;
    unsigned alert_mask;     /* dark red text: results outside the action level */
    int muted;               /* gray text: superseded rows */
} rpt_row_style;

#define RPT_TABLE_MAX_COLS 16

typedef struct rpt_table {
    rpt_doc *d;
    rpt_col cols[RPT_TABLE_MAX_COLS];   /* scaled down to the page when wider */
    int ncols;
    double size;             /* font size of the cells */
    int max_lines;           /* per cell */
    char caption[256];
    long rows;               /* rows drawn so far */
    int stripe;
} rpt_table;

/* Draws the caption (bold, may be "", wrapped to two lines) and the header
 * row, keeping room for at least two rows under them. Columns wider in total
 * than the page's content are scaled down to fit it. The table then owns the page hook until
 * rpt_table_end. */
void rpt_table_begin(rpt_table *t, rpt_doc *d, const rpt_col *cols, int ncols, double size,
                     int max_lines, const char *caption);

/* One row of ncols UTF-8 cells (NULL cells are empty). style may be NULL. */
void rpt_table_row(rpt_table *t, const char *const *cells, const rpt_row_style *style);

/* A line of text across the whole table width (e.g. "none"). */
void rpt_table_note(rpt_table *t, const char *text);

void rpt_table_end(rpt_table *t);

/* Total width of the columns. */
double rpt_table_width(const rpt_col *cols, int ncols);

#endif
