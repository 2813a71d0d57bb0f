/* Page layout for the PDF reports: the document, its embedded fonts, running
 * header and footer (department, generation time, page x of y, the caveat),
 * UTF-8 text measuring, wrapping and cutting with a mark. Private to
 * src/report. Coordinates are PDF points (1/72 in) from the bottom-left
 * corner; d->y is the top of the free space on the current page and moves
 * down as content is placed. */
#ifndef FXL_REPORT_LAYOUT_H
#define FXL_REPORT_LAYOUT_H

#include <hpdf.h>
#include <stddef.h>

#include "fxl/fxl.h"

/* A4 in points (ISO 216: 210 x 297 mm). */
#define RPT_A4_SHORT 595.276
#define RPT_A4_LONG 841.890

/* The mark that ends a cut text (U+2026 HORIZONTAL ELLIPSIS). */
#define RPT_CUT_MARK "\xE2\x80\xA6"

/* Caveat printed on every page, in two lines. */
#define RPT_CAVEAT_1 "Results support, and do not replace, the judgement of a qualified medical physicist."
#define RPT_CAVEAT_2 "Action levels are local settings; follow local policy and regulations."

typedef struct rpt_doc rpt_doc;

/* Called after a page break that happened inside rpt_need, so that a table
 * can repeat its caption and column headers. */
typedef void (*rpt_page_hook)(rpt_doc *d, void *arg);

struct rpt_doc {
    HPDF_Doc pdf;
    /* DejaVu Sans and DejaVu Sans Bold: the build's subsets when the
     * program found them (subset = 1), else the full fonts. A text with a
     * character the subset lacks is measured and drawn in the full font of
     * the same weight instead, loaded the first time one is needed
     * (report/fontcover.h, docs/reports.md). */
    HPDF_Font font;
    HPDF_Font bold;
    HPDF_Font full_font;     /* full DejaVu Sans once loaded (== font without a subset) */
    HPDF_Font full_bold;
    int subset;
    int font_error;          /* the full font could not be loaded when needed */
    char full_path[2][1024]; /* DejaVuSans.ttf, DejaVuSans-Bold.ttf */
    double page_w, page_h;
    double left, right;      /* x of the content's left and right edges */
    double top, bottom;      /* y of the content's top and bottom edges */
    double y;                /* top of the free space on the current page */
    HPDF_Page page;          /* current page, NULL before the first */
    HPDF_Page *pages;        /* every page, for the footers drawn at save */
    int npages, cap;
    char department[256];
    char title[128];         /* right of the running header */
    char subtitle[512];      /* second line of the running header */
    char generated[160];     /* generation time as printed */
    char anchor[192];        /* audit anchor line (fxl_audit_anchor), printed in every footer */
    int force;               /* replace an existing regular output file (--force) */
    rpt_page_hook hook;
    void *hook_arg;
    unsigned long hpdf_error;   /* first libharu error, 0 if none */
    unsigned long hpdf_detail;
    int oom;
};

/* Creates the document with DejaVu Sans and DejaVu Sans Bold embedded (the
 * subsets, with the full fonts from font_dir for text outside them) and
 * UTF-8 text. landscape selects A4 landscape pages. On failure
 * the message is in ctx; call rpt_doc_release anyway. */
int rpt_doc_init(rpt_doc *d, fxl_ctx *ctx, const char *font_dir, int landscape);
void rpt_doc_release(rpt_doc *d);

/* Sets the document information (title, creation date from the stored UTC
 * generation time) so that the same inputs give the same bytes. */
void rpt_doc_info(rpt_doc *d, const char *title, const char *generated_utc);

/* Draws the footers on every page (page x of y needs the count) and writes
 * the file through a temporary name and a rename, so a failed run leaves no
 * half-written report. */
int rpt_doc_save(rpt_doc *d, fxl_ctx *ctx, const char *path);

/* Starts a page with the running header. */
void rpt_page_new(rpt_doc *d);

/* Makes sure `h` points are free below d->y, else starts a page (and runs
 * the hook). Returns 1 when a page was started. */
int rpt_need(rpt_doc *d, double h);

/* ---- text ---------------------------------------------------------------- */

/* Width in points of UTF-8 text in font f at size. */
double rpt_width(rpt_doc *d, HPDF_Font f, double size, const char *text);

/* Draws UTF-8 text with its baseline at (x, y). Invalid UTF-8 and control
 * characters are replaced, so bad data cannot break the document. gray 0 is
 * black. */
void rpt_text(rpt_doc *d, HPDF_Font f, double size, double gray, double x, double y,
              const char *text);
void rpt_text_right(rpt_doc *d, HPDF_Font f, double size, double gray, double x_right,
                    double y, const char *text);
void rpt_text_center(rpt_doc *d, HPDF_Font f, double size, double gray, double x_mid,
                     double y, const char *text);
void rpt_text_rgb(rpt_doc *d, HPDF_Font f, double size, double r, double g, double b,
                  double x, double y, const char *text);

/* Copies text into out, cut to fit `width` with RPT_CUT_MARK at the end
 * when it does not fit. */
void rpt_fit(rpt_doc *d, HPDF_Font f, double size, const char *text, double width, char *out,
             size_t outsz);

/* Takes the next line of at most `width` points from text: breaks at spaces
 * (never between a number and its unit), and at '\n'; a word too long for
 * the line alone is broken after a hyphen or slash, else inside it. Writes
 * the line to out and returns the rest, or NULL
 * when text holds nothing more to print. */
const char *rpt_next_line(rpt_doc *d, HPDF_Font f, double size, const char *text, double width,
                          char *out, size_t outsz);

#define RPT_LINES_MAX 6
#define RPT_LINE_LEN 400
typedef struct rpt_lines {
    int n;
    char line[RPT_LINES_MAX][RPT_LINE_LEN];
} rpt_lines;

/* Wraps text into at most max_lines (<= RPT_LINES_MAX) lines of `width`;
 * what does not fit is cut with the mark on the last line. */
void rpt_wrap(rpt_doc *d, HPDF_Font f, double size, const char *text, double width,
              int max_lines, rpt_lines *out);

/* A wrapped paragraph at x..x+width from d->y down, breaking pages as
 * needed; leaves d->y below it. */
void rpt_paragraph(rpt_doc *d, HPDF_Font f, double size, double x, double width,
                   const char *text);

/* ---- blocks ---------------------------------------------------------------- */

/* A section heading with a rule under it, kept with `keep` points of what
 * follows. */
void rpt_heading(rpt_doc *d, const char *text, double keep);

/* "label: value" lines in two columns of a key/value block. */
void rpt_keyval(rpt_doc *d, double x, double key_w, double val_w, const char *key,
                const char *value);

/* A framed box with a bold headline and a paragraph, e.g. "no data". */
void rpt_notice(rpt_doc *d, const char *headline, const char *text);

/* ---- drawing ----------------------------------------------------------------- */

void rpt_fill_rect(rpt_doc *d, double x, double y, double w, double h, double r, double g,
                   double b);
void rpt_stroke_rect(rpt_doc *d, double x, double y, double w, double h, double width,
                     double gray);
void rpt_line(rpt_doc *d, double x1, double y1, double x2, double y2, double width, double gray);
/* Same with a dash pattern (on, off in points); on == 0 draws solid. */
void rpt_dash_line(rpt_doc *d, double x1, double y1, double x2, double y2, double width,
                   double r, double g, double b, double on, double off);

/* ---- small formatting helpers ------------------------------------------------ */

/* "+1.23 %" / "-0.50 %" (sign when asked), an en dash for NaN. */
void rpt_fmt_pct(char *out, size_t n, double v, int decimals, int sign);
/* "201.3 cGy", an en dash for NaN. */
void rpt_fmt_cgy(char *out, size_t n, double v);
/* A reading with its unit, as entered (every digit: the shortest form that
 * reads back to the stored value), an en dash for NaN. */
void rpt_fmt_reading(char *out, size_t n, double v, const char *unit);
/* People's words for a schema verdict name; the name itself if unknown. */
const char *rpt_verdict_label(const char *verdict);
/* "Family, Given" or "Family". */
void rpt_fmt_name(char *out, size_t n, const char *family, const char *given);

#endif
