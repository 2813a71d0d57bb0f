/* Page layout of the PDF reports: libharu document set-up with embedded
 * TrueType fonts and UTF-8 text, running header and footer, text measuring,
 * wrapping and cutting, boxes and lines, number formatting. */
#include "report/layout.h"
#include "report/fontcover.h"
#include "report/tounicode.h"

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "fxl/core.h"
#include "fxl/outfile.h"
#include "fxl/module.h"

#define MARGIN_SIDE 36.0
#define MARGIN_TOP 28.0
#define MARGIN_BOTTOM 24.0
#define HEADER_H 34.0        /* running header band, from the top margin */
#define FOOTER_H 34.0        /* footer band, above the bottom margin */
#define TEXT_GRAY 0.0
#define SOFT_GRAY 0.35

static void on_hpdf_error(HPDF_STATUS error_no, HPDF_STATUS detail_no, void *user)
{
    rpt_doc *d = user;

    if (d && !d->hpdf_error) {
        d->hpdf_error = error_no;
        d->hpdf_detail = detail_no;
    }
}

static int font_path(fxl_ctx *ctx, char *out, size_t n, const char *dir, const char *file)
{
    snprintf(out, n, "%s/%s", dir, file);
    if (access(out, R_OK) != 0)
        return fxl_fail(ctx, FXL_EIO,
                        "font '%s' not found (install the Debian package fonts-dejavu-core)", out);
    return 0;
}

/* The subset file `file` of `size` bytes in the build tree (fonts/ beside
 * the program) or the installed data directory (../share/fxledger/fonts
 * from the program's directory), found from /proc/self/exe so that any
 * install prefix works. 0 and the path in out, or -1. */
static int subset_path(char *out, size_t n, const char *file, long size)
{
    static const char *const rel[] = {"fonts", "../share/fxledger/fonts"};
    struct stat st;
    size_t i;

    if (!file[0] || size <= 0)
        return -1;
    for (i = 0; i < sizeof rel / sizeof rel[0]; i++)
        if (fxl_beside_program(out, n, rel[i], file) == 0 && stat(out, &st) == 0 && st.st_size == size)
            return 0;
    return -1;
}

/* Loads a TrueType font embedded, with the UTF-8 encoder and a proper text
 * map; NULL on failure (the error is in d->hpdf_error or d->font_error). */
static HPDF_Font load_font(rpt_doc *d, const char *path)
{
    const char *name;
    HPDF_Font f = NULL;

    /* Embedded (HPDF_TRUE): the file prints the same anywhere. */
    if ((name = HPDF_LoadTTFontFromFile(d->pdf, path, HPDF_TRUE)) != NULL)
        f = HPDF_GetFont(d->pdf, name, "UTF-8");
    if (!f || d->hpdf_error)
        return NULL;
    /* libharu's own ToUnicode stream is an encoding CMap (report/tounicode.h) */
    if (rpt_tounicode_fix(f) != 0) {
        d->font_error = 1;
        return NULL;
    }
    return f;
}

int rpt_doc_init(rpt_doc *d, fxl_ctx *ctx, const char *font_dir, int landscape)
{
    char sub_regular[1024], sub_bold[1024];
    int rc;

    memset(d, 0, sizeof *d);
    if (!font_dir || !*font_dir)
        font_dir = FXL_FONT_DIR;
    /* The full fonts are needed whenever a text is outside the subset. */
    if ((rc = font_path(ctx, d->full_path[0], sizeof d->full_path[0], font_dir, "DejaVuSans.ttf")) != 0 ||
        (rc = font_path(ctx, d->full_path[1], sizeof d->full_path[1], font_dir, "DejaVuSans-Bold.ttf")) != 0)
        return rc;
    d->pdf = HPDF_New(on_hpdf_error, d);
    if (!d->pdf)
        return fxl_fail(ctx, FXL_EIO, "out of memory creating the PDF document");
    HPDF_SetCompressionMode(d->pdf, HPDF_COMP_ALL);
    HPDF_UseUTFEncodings(d->pdf);
    HPDF_SetCurrentEncoder(d->pdf, "UTF-8");
    /* The subsets when the build made them and they are where the program
     * looks; else the full fonts from the start. */
    if (rpt_cover_regular_n > 0 && rpt_cover_bold_n > 0 &&
        subset_path(sub_regular, sizeof sub_regular, rpt_subset_regular_file,
                    rpt_subset_regular_size) == 0 &&
        subset_path(sub_bold, sizeof sub_bold, rpt_subset_bold_file, rpt_subset_bold_size) == 0) {
        d->subset = 1;
        d->font = load_font(d, sub_regular);
        d->bold = load_font(d, sub_bold);
    } else {
        d->font = d->full_font = load_font(d, d->full_path[0]);
        d->bold = d->full_bold = load_font(d, d->full_path[1]);
    }
    if (!d->font || !d->bold || d->hpdf_error || d->font_error)
        return fxl_fail(ctx, FXL_EIO, "cannot load the report fonts%s (PDF library error 0x%04lX)",
                        d->font_error ? " or write their text map" : "", d->hpdf_error);
    d->page_w = landscape ? RPT_A4_LONG : RPT_A4_SHORT;
    d->page_h = landscape ? RPT_A4_SHORT : RPT_A4_LONG;
    d->left = MARGIN_SIDE;
    d->right = d->page_w - MARGIN_SIDE;
    d->top = d->page_h - MARGIN_TOP - HEADER_H;
    d->bottom = MARGIN_BOTTOM + FOOTER_H;
    return 0;
}

void rpt_doc_release(rpt_doc *d)
{
    if (d->pdf)
        HPDF_Free(d->pdf);
    free(d->pages);
    memset(d, 0, sizeof *d);
}

static int parse_stored(const char *t, int v[6])
{
    return t && sscanf(t, "%4d-%2d-%2dT%2d:%2d:%2d", &v[0], &v[1], &v[2], &v[3], &v[4], &v[5]) == 6;
}

void rpt_doc_info(rpt_doc *d, const char *title, const char *generated_utc)
{
    HPDF_Date date;
    int v[6];

    HPDF_SetInfoAttr(d->pdf, HPDF_INFO_TITLE, title);
    HPDF_SetInfoAttr(d->pdf, HPDF_INFO_CREATOR, "fxledger " FXL_VERSION);
    HPDF_SetInfoAttr(d->pdf, HPDF_INFO_AUTHOR, d->department);
    if (parse_stored(generated_utc, v)) {
        memset(&date, 0, sizeof date);
        date.year = v[0];
        date.month = v[1];
        date.day = v[2];
        date.hour = v[3];
        date.minutes = v[4];
        date.seconds = v[5];
        date.ind = 'Z';
        HPDF_SetInfoDateAttr(d->pdf, HPDF_INFO_CREATION_DATE, date);
    }
}

static void draw_footer(rpt_doc *d, int index)
{
    char buf[600];
    double y = MARGIN_BOTTOM + FOOTER_H - 6;

    d->page = d->pages[index];
    rpt_line(d, d->left, y, d->right, y, 0.5, 0.55);
    rpt_text(d, d->bold, 7, TEXT_GRAY, d->left, y - 9, RPT_CAVEAT_1);
    rpt_text(d, d->font, 7, TEXT_GRAY, d->left, y - 18, RPT_CAVEAT_2);
    rpt_fit(d, d->font, 7, d->department, (d->right - d->left) * 0.45, buf, sizeof buf);
    rpt_text(d, d->font, 7, SOFT_GRAY, d->left, y - 27, buf);
    snprintf(buf, sizeof buf, "Generated %s", d->generated);
    rpt_text_center(d, d->font, 7, SOFT_GRAY, (d->left + d->right) / 2 + 40, y - 27, buf);
    snprintf(buf, sizeof buf, "Page %d of %d", index + 1, d->npages);
    rpt_text_right(d, d->bold, 8, TEXT_GRAY, d->right, y - 27, buf);
    /* The record as read, for checking later with 'fxledger verify --anchor'. */
    if (d->anchor[0])
        rpt_text(d, d->font, 6, SOFT_GRAY, d->left, y - 35, d->anchor);
}

int rpt_doc_save(rpt_doc *d, fxl_ctx *ctx, const char *path)
{
    fxl_outfile o = FXL_OUTFILE_INIT;
    HPDF_BYTE chunk[8192];
    HPDF_UINT32 n;
    int i, rc;

    for (i = 0; i < d->npages; i++)
        draw_footer(d, i);
    if (d->oom)
        return fxl_fail(ctx, FXL_EIO, "out of memory while laying out the report");
    if (d->font_error)
        return fxl_fail(ctx, FXL_EIO, "cannot load the full report fonts for a text the subset "
                        "does not cover");
    if (d->hpdf_error)
        return fxl_fail(ctx, FXL_EIO, "PDF library error 0x%04lX (detail %lu) while drawing the report",
                        d->hpdf_error, d->hpdf_detail);
    /* Into memory, then through the safe output file: libharu's own
     * SaveToFile would follow a symlink and replace any file. */
    if (HPDF_SaveToStream(d->pdf) != HPDF_OK || d->hpdf_error)
        return fxl_fail(ctx, FXL_EIO, "PDF library error 0x%04lX while writing the report", d->hpdf_error);
    if ((rc = fxl_outfile_open(&o, ctx, path, d->force ? FXL_OUT_FORCE : 0)) != 0)
        return rc;
    HPDF_ResetStream(d->pdf);
    for (;;) {
        HPDF_STATUS st;
        n = sizeof chunk;
        st = HPDF_ReadFromStream(d->pdf, chunk, &n);
        if (n > 0 && fwrite(chunk, 1, n, o.fp) != n) {
            rc = fxl_fail(ctx, FXL_EIO, "cannot write report '%s': %s", path, strerror(errno));
            goto cleanup;
        }
        if (st == HPDF_STREAM_EOF)
            break;
        if (st != HPDF_OK) {
            rc = fxl_fail(ctx, FXL_EIO, "PDF library error 0x%04lX while writing the report", (unsigned long)st);
            goto cleanup;
        }
    }
    rc = fxl_outfile_commit(&o, ctx);
cleanup:
    fxl_outfile_abort(&o);
    return rc;
}

void rpt_page_new(rpt_doc *d)
{
    double y = d->page_h - MARGIN_TOP;
    char buf[600];

    if (d->npages == d->cap) {
        int cap = d->cap ? d->cap * 2 : 16;
        HPDF_Page *p = realloc(d->pages, (size_t)cap * sizeof *p);
        if (!p) {
            d->oom = 1;
            return;
        }
        d->pages = p;
        d->cap = cap;
    }
    d->page = HPDF_AddPage(d->pdf);
    HPDF_Page_SetSize(d->page, HPDF_PAGE_SIZE_A4,
                      d->page_w > d->page_h ? HPDF_PAGE_LANDSCAPE : HPDF_PAGE_PORTRAIT);
    d->pages[d->npages++] = d->page;

    rpt_fit(d, d->bold, 10, d->department, (d->right - d->left) * 0.55, buf, sizeof buf);
    rpt_text(d, d->bold, 10, TEXT_GRAY, d->left, y - 10, buf);
    rpt_text_right(d, d->font, 9, SOFT_GRAY, d->right, y - 10, d->title);
    rpt_fit(d, d->font, 8, d->subtitle, d->right - d->left, buf, sizeof buf);
    rpt_text(d, d->font, 8, SOFT_GRAY, d->left, y - 22, buf);
    rpt_line(d, d->left, y - 27, d->right, y - 27, 0.8, 0.2);
    d->y = d->top;
}

int rpt_need(rpt_doc *d, double h)
{
    if (d->page && d->y - h >= d->bottom)
        return 0;
    rpt_page_new(d);
    if (d->hook)
        d->hook(d, d->hook_arg);
    return 1;
}

/* ---- text ------------------------------------------------------------------ */

/* Length of the valid UTF-8 sequence at s, 0 if invalid. */
static int utf8_len(const unsigned char *s)
{
    int n, i;
    unsigned cp;

    if (s[0] < 0x80)
        return 1;
    if ((s[0] & 0xE0) == 0xC0) {
        n = 2;
        cp = s[0] & 0x1F;
    } else if ((s[0] & 0xF0) == 0xE0) {
        n = 3;
        cp = s[0] & 0x0F;
    } else if ((s[0] & 0xF8) == 0xF0) {
        n = 4;
        cp = s[0] & 0x07;
    } else {
        return 0;
    }
    for (i = 1; i < n; i++) {
        if ((s[i] & 0xC0) != 0x80)
            return 0;
        cp = (cp << 6) | (s[i] & 0x3F);
    }
    /* Overlong forms, surrogates and values past U+10FFFF are invalid. */
    if ((n == 2 && cp < 0x80) || (n == 3 && cp < 0x800) || (n == 4 && cp < 0x10000) ||
        (cp >= 0xD800 && cp <= 0xDFFF) || cp > 0x10FFFF)
        return 0;
    return n;
}

/* Copies text with invalid bytes as '?' and control characters as spaces. */
static void sanitize(char *out, size_t outsz, const char *text)
{
    const unsigned char *s = (const unsigned char *)(text ? text : "");
    size_t o = 0;

    while (*s && o + 5 < outsz) {
        int n = utf8_len(s);
        if (n == 0) {
            out[o++] = '?';
            s++;
        } else if (n == 1) {
            out[o++] = (*s < 0x20 || *s == 0x7F) ? ' ' : (char)*s;
            s++;
        } else {
            memcpy(out + o, s, (size_t)n);
            o += (size_t)n;
            s += n;
        }
    }
    out[o] = '\0';
}

static int in_cover(const rpt_cover_range *r, size_t n, unsigned cp)
{
    size_t lo = 0, hi = n;

    while (lo < hi) {
        size_t mid = lo + (hi - lo) / 2;
        if (cp < r[mid].lo)
            hi = mid;
        else if (cp > r[mid].hi)
            lo = mid + 1;
        else
            return 1;
    }
    return 0;
}

/* 1 when every character of text[0..len) is in the cover. ASCII is always
 * covered (printable in the subset; control characters print as spaces);
 * an invalid byte prints as '?'. */
static int text_covered(const rpt_cover_range *r, size_t n, const char *text, size_t len)
{
    const unsigned char *s = (const unsigned char *)text;
    size_t i = 0;

    while (i < len && s[i]) {
        int k;
        unsigned cp;
        if (s[i] < 0x80) {
            i++;
            continue;
        }
        k = utf8_len(s + i);
        if (k == 0 || i + (size_t)k > len) {
            i++;
            continue;
        }
        cp = k == 2 ? (s[i] & 0x1Fu) : k == 3 ? (s[i] & 0x0Fu) : (s[i] & 0x07u);
        for (int j = 1; j < k; j++)
            cp = (cp << 6) | (s[i + j] & 0x3Fu);
        if (!in_cover(r, n, cp))
            return 0;
        i += (size_t)k;
    }
    return 1;
}

/* The font a text is measured and drawn in: f itself, or, when f is a
 * subset that lacks a character of the text, the full DejaVu font of the
 * same weight, loaded the first time it is needed. Glyphs and advance
 * widths are the same in both, so a line measured in one and drawn in the
 * other is the same width. */
static HPDF_Font pick(rpt_doc *d, HPDF_Font f, const char *text, size_t len)
{
    int bold;
    HPDF_Font *full;

    if (!d || !d->subset || (f != d->font && f != d->bold))
        return f;
    bold = f == d->bold;
    if (text_covered(bold ? rpt_cover_bold : rpt_cover_regular,
                     bold ? rpt_cover_bold_n : rpt_cover_regular_n, text, len))
        return f;
    full = bold ? &d->full_bold : &d->full_font;
    if (!*full && !d->font_error) {
        *full = load_font(d, d->full_path[bold]);
        if (!*full)
            d->font_error = 1;  /* the report fails at save, never a missing glyph */
    }
    return *full ? *full : f;
}

static double width_raw(HPDF_Font f, double size, const char *text, size_t len)
{
    HPDF_TextWidth tw;

    if (len == 0)
        return 0;
    tw = HPDF_Font_TextWidth(f, (const HPDF_BYTE *)text, (HPDF_UINT)len);
    return tw.width * size / 1000.0;
}

double rpt_width(rpt_doc *d, HPDF_Font f, double size, const char *text)
{
    char buf[2048];

    sanitize(buf, sizeof buf, text);
    return width_raw(pick(d, f, buf, strlen(buf)), size, buf, strlen(buf));
}

void rpt_text_rgb(rpt_doc *d, HPDF_Font f, double size, double r, double g, double b,
                  double x, double y, const char *text)
{
    char buf[2048];

    if (!d->page || !text || !*text)
        return;
    sanitize(buf, sizeof buf, text);
    f = pick(d, f, buf, strlen(buf));
    HPDF_Page_SetRGBFill(d->page, (HPDF_REAL)r, (HPDF_REAL)g, (HPDF_REAL)b);
    HPDF_Page_BeginText(d->page);
    HPDF_Page_SetFontAndSize(d->page, f, (HPDF_REAL)size);
    HPDF_Page_TextOut(d->page, (HPDF_REAL)x, (HPDF_REAL)y, buf);
    HPDF_Page_EndText(d->page);
    HPDF_Page_SetRGBFill(d->page, 0, 0, 0);
}

void rpt_text(rpt_doc *d, HPDF_Font f, double size, double gray, double x, double y,
              const char *text)
{
    rpt_text_rgb(d, f, size, gray, gray, gray, x, y, text);
}

void rpt_text_right(rpt_doc *d, HPDF_Font f, double size, double gray, double x_right,
                    double y, const char *text)
{
    rpt_text(d, f, size, gray, x_right - rpt_width(d, f, size, text), y, text);
}

void rpt_text_center(rpt_doc *d, HPDF_Font f, double size, double gray, double x_mid,
                     double y, const char *text)
{
    rpt_text(d, f, size, gray, x_mid - rpt_width(d, f, size, text) / 2, y, text);
}

void rpt_fit(rpt_doc *d, HPDF_Font f, double size, const char *text, double width, char *out,
             size_t outsz)
{
    char buf[2048];
    double w = 0, mark;
    size_t i = 0;

    sanitize(buf, sizeof buf, text);
    f = pick(d, f, buf, strlen(buf));
    if (width_raw(f, size, buf, strlen(buf)) <= width) {
        snprintf(out, outsz, "%s", buf);
        return;
    }
    mark = width_raw(f, size, RPT_CUT_MARK, strlen(RPT_CUT_MARK));
    while (buf[i]) {
        int n = utf8_len((const unsigned char *)buf + i);
        double cw = width_raw(f, size, buf + i, (size_t)n);
        if (w + cw + mark > width || i + (size_t)n + sizeof RPT_CUT_MARK > outsz)
            break;
        w += cw;
        i += (size_t)n;
    }
    while (i > 0 && buf[i - 1] == ' ')
        i--;
    memcpy(out, buf, i);
    memcpy(out + i, RPT_CUT_MARK, sizeof RPT_CUT_MARK);
}

/* 1 when the word at s is a unit that must stay with the number before it. */
static int unit_follows(const char *s)
{
    static const char *const units[] = {"%", "cGy", "nC", "pC", "mV", "MV", "MeV", "cm", "deg",
                                        "d", "degC", "kGy", "Gy"};
    size_t i, n;

    for (i = 0; i < sizeof units / sizeof units[0]; i++) {
        n = strlen(units[i]);
        if (strncmp(s, units[i], n) == 0 &&
            (s[n] == '\0' || s[n] == ' ' || s[n] == ',' || s[n] == '.' || s[n] == ')' ||
             s[n] == ';' || s[n] == '/' || s[n] == ':'))
            return 1;
    }
    return 0;
}

const char *rpt_next_line(rpt_doc *d, HPDF_Font f, double size, const char *text, double width,
                          char *out, size_t outsz)
{
    const char *p = text, *q, *brk = NULL, *brk_next = NULL, *hbrk = NULL, *end, *rest;
    double w = 0;
    size_t len;

    if (!p)
        return NULL;
    while (*p == ' ')
        p++;
    if (!*p)
        return NULL;
    f = pick(d, f, p, strlen(p));
    q = p;
    while (*q && *q != '\n') {
        int n = utf8_len((const unsigned char *)q);
        double cw;
        if (n == 0)
            n = 1;  /* drawn as '?' by sanitize; about as wide as a letter */
        cw = width_raw(f, size, n == 1 && (unsigned char)*q >= 0x80 ? "?" : q, (size_t)n);
        if (w + cw > width && q > p) {
            if (*q == ' ' && !(q[-1] >= '0' && q[-1] <= '9' && unit_follows(q + 1))) {
                /* a space that does not fit is the break itself */
                end = q;
                rest = q + 1;
            } else if (brk) {
                end = brk;
                rest = brk_next;
            } else if (hbrk) {
                /* no space on the line: a word too long alone, cut after
                 * its last hyphen or slash rather than inside a letter run */
                end = hbrk;
                rest = hbrk;
            } else {
                end = q;
                rest = q;
            }
            goto done;
        }
        w += cw;
        if (*q == ' ' && !(q > p && q[-1] >= '0' && q[-1] <= '9' && unit_follows(q + 1))) {
            /* a space, unless it joins a number to its unit */
            brk = q;
            brk_next = q + 1;
        } else if ((*q == '-' || *q == '/') && !(q[1] >= '0' && q[1] <= '9')) {
            /* after a hyphen or slash only when no space is left to break
             * at (an identifier such as BR-R-1 is one word), never inside a
             * number or a date */
            hbrk = q + 1;
        }
        q += n;
    }
    end = q;
    rest = *q == '\n' ? q + 1 : q;
done:
    while (end > p && end[-1] == ' ')
        end--;
    len = (size_t)(end - p);
    if (len >= outsz)
        len = outsz - 1;
    /* Never end the copy inside a multi-byte character. */
    while (len > 0 && ((unsigned char)p[len] & 0xC0) == 0x80)
        len--;
    memcpy(out, p, len);
    out[len] = '\0';
    return rest;
}

void rpt_wrap(rpt_doc *d, HPDF_Font f, double size, const char *text, double width,
              int max_lines, rpt_lines *out)
{
    const char *rest = text;
    char line[RPT_LINE_LEN];

    if (max_lines > RPT_LINES_MAX)
        max_lines = RPT_LINES_MAX;
    out->n = 0;
    while (out->n < max_lines &&
           (rest = rpt_next_line(d, f, size, rest, width, line, sizeof line)) != NULL)
        snprintf(out->line[out->n++], RPT_LINE_LEN, "%s", line);
    if (rest && out->n > 0) {
        /* Something is left: cut the last line with the mark. */
        const char *r = rest;
        while (*r == ' ' || *r == '\n')
            r++;
        if (*r) {
            char joined[2 * RPT_LINE_LEN];
            snprintf(joined, sizeof joined, "%s %s", out->line[out->n - 1], r);
            rpt_fit(d, f, size, joined, width, out->line[out->n - 1], RPT_LINE_LEN);
            if (strstr(out->line[out->n - 1], RPT_CUT_MARK) == NULL) {
                /* the joined text fitted after all (cannot happen with a
                 * greedy wrap), mark the cut anyway */
                rpt_fit(d, f, size, out->line[out->n - 1], width - 1, out->line[out->n - 1],
                        RPT_LINE_LEN);
            }
        }
    }
}

void rpt_paragraph(rpt_doc *d, HPDF_Font f, double size, double x, double width,
                   const char *text)
{
    const char *rest = text;
    char line[RPT_LINE_LEN];
    double lead = size * 1.35;

    while ((rest = rpt_next_line(d, f, size, rest, width, line, sizeof line)) != NULL) {
        rpt_need(d, lead);
        rpt_text(d, f, size, TEXT_GRAY, x, d->y - size, line);
        d->y -= lead;
    }
}

/* ---- blocks ------------------------------------------------------------------- */

void rpt_heading(rpt_doc *d, const char *text, double keep)
{
    double h = 24;

    if (d->page && d->y < d->top - 1)
        d->y -= 8;
    rpt_need(d, h + keep);
    rpt_text(d, d->bold, 11.5, TEXT_GRAY, d->left, d->y - 13, text);
    rpt_line(d, d->left, d->y - 17.5, d->right, d->y - 17.5, 0.6, 0.45);
    d->y -= h;
}

void rpt_keyval(rpt_doc *d, double x, double key_w, double val_w, const char *key,
                const char *value)
{
    rpt_lines lines;
    int i;

    rpt_wrap(d, d->font, 9, value && *value ? value : "\xE2\x80\x93", val_w, 3, &lines);
    rpt_need(d, 12.5 * lines.n);
    rpt_text(d, d->font, 8.5, SOFT_GRAY, x, d->y - 9, key);
    for (i = 0; i < lines.n; i++)
        rpt_text(d, d->font, 9, TEXT_GRAY, x + key_w, d->y - 9 - 12 * i, lines.line[i]);
    d->y -= 12.5 * (lines.n > 0 ? lines.n : 1);
}

void rpt_notice(rpt_doc *d, const char *headline, const char *text)
{
    double w = d->right - d->left, pad = 12, top;
    rpt_lines lines;
    int i;

    rpt_wrap(d, d->font, 10, text, w - 2 * pad, RPT_LINES_MAX, &lines);
    rpt_need(d, 40 + 13.5 * lines.n);
    top = d->y - 6;
    rpt_fill_rect(d, d->left, top - (30 + 13.5 * lines.n), w, 30 + 13.5 * lines.n, 0.96, 0.96, 0.93);
    rpt_stroke_rect(d, d->left, top - (30 + 13.5 * lines.n), w, 30 + 13.5 * lines.n, 1.0, 0.3);
    rpt_text(d, d->bold, 13, TEXT_GRAY, d->left + pad, top - 19, headline);
    for (i = 0; i < lines.n; i++)
        rpt_text(d, d->font, 10, TEXT_GRAY, d->left + pad, top - 35 - 13.5 * i, lines.line[i]);
    d->y = top - (30 + 13.5 * lines.n) - 8;
}

/* ---- drawing ------------------------------------------------------------------ */

void rpt_fill_rect(rpt_doc *d, double x, double y, double w, double h, double r, double g,
                   double b)
{
    if (!d->page)
        return;
    HPDF_Page_SetRGBFill(d->page, (HPDF_REAL)r, (HPDF_REAL)g, (HPDF_REAL)b);
    HPDF_Page_Rectangle(d->page, (HPDF_REAL)x, (HPDF_REAL)y, (HPDF_REAL)w, (HPDF_REAL)h);
    HPDF_Page_Fill(d->page);
    HPDF_Page_SetRGBFill(d->page, 0, 0, 0);
}

void rpt_stroke_rect(rpt_doc *d, double x, double y, double w, double h, double width,
                     double gray)
{
    if (!d->page)
        return;
    HPDF_Page_SetLineWidth(d->page, (HPDF_REAL)width);
    HPDF_Page_SetGrayStroke(d->page, (HPDF_REAL)gray);
    HPDF_Page_Rectangle(d->page, (HPDF_REAL)x, (HPDF_REAL)y, (HPDF_REAL)w, (HPDF_REAL)h);
    HPDF_Page_Stroke(d->page);
}

void rpt_dash_line(rpt_doc *d, double x1, double y1, double x2, double y2, double width,
                   double r, double g, double b, double on, double off)
{
    HPDF_UINT16 dash[2];

    if (!d->page)
        return;
    HPDF_Page_SetLineWidth(d->page, (HPDF_REAL)width);
    HPDF_Page_SetRGBStroke(d->page, (HPDF_REAL)r, (HPDF_REAL)g, (HPDF_REAL)b);
    if (on > 0) {
        dash[0] = (HPDF_UINT16)on;
        dash[1] = (HPDF_UINT16)off;
        HPDF_Page_SetDash(d->page, dash, 2, 0);
    }
    HPDF_Page_MoveTo(d->page, (HPDF_REAL)x1, (HPDF_REAL)y1);
    HPDF_Page_LineTo(d->page, (HPDF_REAL)x2, (HPDF_REAL)y2);
    HPDF_Page_Stroke(d->page);
    if (on > 0)
        HPDF_Page_SetDash(d->page, NULL, 0, 0);
    HPDF_Page_SetRGBStroke(d->page, 0, 0, 0);
}

void rpt_line(rpt_doc *d, double x1, double y1, double x2, double y2, double width, double gray)
{
    rpt_dash_line(d, x1, y1, x2, y2, width, gray, gray, gray, 0, 0);
}

/* ---- formatting ------------------------------------------------------------------ */

#define DASH "\xE2\x80\x93"  /* U+2013, shown where a value is missing */

void rpt_fmt_pct(char *out, size_t n, double v, int decimals, int sign)
{
    if (!isfinite(v))
        snprintf(out, n, DASH);
    else if (sign)
        snprintf(out, n, "%+.*f %%", decimals, fabs(v) < 0.5 * pow(10, -decimals) ? 0.0 : v);
    else
        snprintf(out, n, "%.*f %%", decimals, v);
}

void rpt_fmt_cgy(char *out, size_t n, double v)
{
    if (!isfinite(v))
        snprintf(out, n, DASH);
    else
        snprintf(out, n, "%.1f cGy", v);
}

void rpt_fmt_reading(char *out, size_t n, double v, const char *unit)
{
    char num[40];
    int p;

    if (!isfinite(v)) {
        snprintf(out, n, DASH);
        return;
    }
    /* As entered: the fewest decimals that read back to the stored value,
     * so 12.774 stays 12.774 and 20.1 is not padded to 20.100 (a typed
     * decimal has far fewer than 15 significant digits; past 12 decimals
     * the value was computed, not typed, and 12 are shown). */
    for (p = 0; p <= 12; p++) {
        snprintf(num, sizeof num, "%.*f", p, v);
        if (strtod(num, NULL) == v)
            break;
    }
    snprintf(out, n, "%s %s", num, unit && *unit ? unit : "");
}

const char *rpt_verdict_label(const char *verdict)
{
    fxl_verdict v;

    if (verdict && fxl_verdict_parse(&v, verdict) == 0)
        return fxl_verdict_label(v);
    return verdict ? verdict : "";
}

void rpt_fmt_name(char *out, size_t n, const char *family, const char *given)
{
    if (given && *given)
        snprintf(out, n, "%s, %s", family ? family : "", given);
    else
        snprintf(out, n, "%s", family ? family : "");
}
