/* Tables sized to their content that fall back to one block per row when
 * they would pass the console width; paragraphs wrapped at words. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli/table.h"

size_t cli_text_width(const char *s)
{
    size_t n = 0;

    for (; s && *s; s++)
        if (((unsigned char)*s & 0xC0) != 0x80)
            n++;
    return n;
}

/* Bytes of the first `chars` characters of s. */
static size_t bytes_of(const char *s, size_t chars)
{
    size_t b = 0, c = 0;

    while (s[b]) {
        if (((unsigned char)s[b] & 0xC0) != 0x80) {
            if (c == chars)
                break;
            c++;
        }
        b++;
    }
    return b;
}

void cli_wrap(FILE *out, const char *first, const char *text, int width)
{
    cli_wrap_hang(out, first, (int)cli_text_width(first), text, width);
}

void cli_wrap_hang(FILE *out, const char *first, int hang, const char *text, int width)
{
    size_t indent = (size_t)(hang < 0 ? 0 : hang), fw = cli_text_width(first);
    size_t room = width > (int)indent + 10 ? (size_t)width - indent : 10;
    size_t col;          /* characters used on this line beyond the indent */
    const char *p = text ? text : "";
    int words = 0;       /* words on this line */

    fputs(first, out);
    col = fw > indent ? fw - indent : 0;
    for (;;) {
        const char *e;
        size_t w, need;

        while (*p == ' ')
            p++;
        if (!*p)
            break;
        for (e = p; *e && *e != ' '; e++)
            ;
        w = cli_text_width(p) - cli_text_width(e);
        need = w + (words ? 1 : 0);
        if (col + need > room && (words || col > 0) && w <= room) {
            fprintf(out, "\n%*s", (int)indent, "");
            col = 0;
            words = 0;
            need = w;
        }
        if (words) {
            fputc(' ', out);
            col++;
        }
        while (col + w > room) {  /* a word longer than a line: broken only then */
            size_t part = room > col ? room - col : 1, b = bytes_of(p, part);
            fwrite(p, 1, b, out);
            fprintf(out, "\n%*s", (int)indent, "");
            p += b;
            w -= part;
            col = 0;
        }
        fwrite(p, 1, (size_t)(e - p), out);
        col += w;
        words++;
        p = e;
    }
    fputc('\n', out);
}

void cli_table_init(cli_table *t, const char *const *head)
{
    memset(t, 0, sizeof *t);
    t->gap = 2;
    while (head[t->ncol] && t->ncol < CLI_TABLE_COLS) {
        t->head[t->ncol] = head[t->ncol];
        t->ncol++;
    }
}

int cli_table_add(cli_table *t, const char *const *cells)
{
    size_t i;

    if (t->nrow == t->cap) {
        size_t cap = t->cap ? 2 * t->cap : 16;
        char **c = realloc(t->cells, cap * t->ncol * sizeof *c);
        if (!c)
            return -1;
        t->cells = c;
        t->cap = cap;
    }
    for (i = 0; i < t->ncol; i++) {
        const char *v = cells[i] ? cells[i] : "";
        char *copy = malloc(strlen(v) + 1);
        if (!copy)
            return -1;
        strcpy(copy, v);
        t->cells[t->nrow * t->ncol + i] = copy;
    }
    t->nrow++;
    return 0;
}

void cli_table_release(cli_table *t)
{
    size_t i;

    for (i = 0; i < t->nrow * t->ncol; i++)
        free(t->cells[i]);
    free(t->cells);
    memset(t, 0, sizeof *t);
}

static void pad(FILE *out, const char *s, size_t w, int right, int last)
{
    size_t n = cli_text_width(s);

    if (right && n < w)
        fprintf(out, "%*s", (int)(w - n), "");
    fputs(s, out);
    if (!right && !last && n < w)
        fprintf(out, "%*s", (int)(w - n), "");
}

/* Characters of the longest word of s. */
static size_t longest_word(const char *s)
{
    size_t best = 0, cur = 0;

    for (; *s; s++) {
        if (*s == ' ') {
            cur = 0;
            continue;
        }
        if (((unsigned char)*s & 0xC0) != 0x80 && ++cur > best)
            best = cur;
    }
    return best;
}

/* The next line of at most w characters of *p, broken at a space (w is at
 * least the longest word): its start and length in bytes; *p moves past it. */
static int next_line(const char **p, size_t w, const char **start, size_t *len)
{
    const char *s = *p, *end, *q;
    size_t col = 0;

    while (*s == ' ')
        s++;
    if (!*s)
        return 0;
    *start = s;
    end = s;
    for (q = s; *q;) {
        const char *e;
        size_t ww;
        for (e = q; *e && *e != ' '; e++)
            ;
        ww = cli_text_width(q) - cli_text_width(e);
        if (end != s && col + 1 + ww > w)
            break;
        col += (end != s ? 1 : 0) + ww;
        end = e;
        for (q = e; *q == ' '; q++)
            ;
    }
    *len = (size_t)(end - s);
    *p = end;
    return 1;
}

static void pad_n(FILE *out, const char *s, size_t bytes, size_t w, int right, int last)
{
    char buf[512];

    if (bytes >= sizeof buf)
        bytes = sizeof buf - 1;
    memcpy(buf, s, bytes);
    buf[bytes] = '\0';
    pad(out, buf, w, right, last);
}

void cli_table_print(FILE *out, const cli_table *t, int width, int indent)
{
    size_t w[CLI_TABLE_COLS], total = 0, i, r, headw = 0, shown = 0;
    int used[CLI_TABLE_COLS], gap = t->gap > 0 ? t->gap : 1, first;

    for (i = 0; i < t->ncol; i++) {
        used[i] = 0;
        w[i] = cli_text_width(t->head[i]);
        for (r = 0; r < t->nrow; r++) {
            const char *v = t->cells[r * t->ncol + i];
            size_t n = cli_text_width(v);
            if (*v)
                used[i] = 1;
            if (n > w[i])
                w[i] = n;
        }
        if (t->below[i])
            used[i] = 0;    /* printed under the row, not as a column */
        if (!used[i])
            continue;
        total += w[i] + (shown ? (size_t)gap : 0);
        shown++;
        if (cli_text_width(t->head[i]) > headw)
            headw = cli_text_width(t->head[i]);
    }
    /* Too wide: narrow the wrap columns, first first, down to their longest
     * word (and heading). */
    for (i = 0; i < t->ncol && total + (size_t)indent > (size_t)width; i++) {
        size_t minw, excess = total + (size_t)indent - (size_t)width;
        if (!used[i] || !t->wrap[i])
            continue;
        minw = cli_text_width(t->head[i]);
        for (r = 0; r < t->nrow; r++) {
            size_t lw = longest_word(t->cells[r * t->ncol + i]);
            if (lw > minw)
                minw = lw;
        }
        if (w[i] > minw) {
            size_t cut = w[i] - minw < excess ? w[i] - minw : excess;
            w[i] -= cut;
            total -= cut;
        }
    }
    if (total + (size_t)indent <= (size_t)width) {
        size_t last = 0;
        for (i = 0; i < t->ncol; i++)
            if (used[i])
                last = i;
        fprintf(out, "%*s", indent, "");
        for (i = 0, first = 1; i < t->ncol; i++) {
            if (!used[i])
                continue;
            if (!first)
                fprintf(out, "%*s", gap, "");
            first = 0;
            pad(out, t->head[i], w[i], t->right[i], i == last);
        }
        fputc('\n', out);
        for (r = 0; r < t->nrow; r++) {
            const char *rest[CLI_TABLE_COLS];
            int more = 1, line;
            for (i = 0; i < t->ncol; i++)
                rest[i] = t->cells[r * t->ncol + i];
            /* a cell wider than its column (a wrap column) goes on over the
             * next lines, the other cells blank there */
            for (line = 0; more; line++) {
                char *buf = NULL;
                size_t blen = 0;
                FILE *row = open_memstream(&buf, &blen);
                FILE *dst = out;
                if (row)
                    out = row;
                more = 0;
                fprintf(out, "%*s", indent, "");
                for (i = 0, first = 1; i < t->ncol; i++) {
                    const char *st = "";
                    size_t len = 0;
                    if (!used[i])
                        continue;
                    if (!first)
                        fprintf(out, "%*s", gap, "");
                    first = 0;
                    if (cli_text_width(rest[i]) <= w[i] && !strchr(rest[i], '\n')) {
                        if (line == 0 || t->wrap[i])
                            pad(out, rest[i], w[i], t->right[i], i == last);
                        else
                            pad(out, "", w[i], t->right[i], i == last);
                        rest[i] = "";
                        continue;
                    }
                    if (next_line(&rest[i], w[i], &st, &len))
                        pad_n(out, st, len, w[i], t->right[i], i == last);
                    else
                        pad(out, "", w[i], t->right[i], i == last);
                    while (*rest[i] == ' ')
                        rest[i]++;
                    if (*rest[i])
                        more = 1;
                }
                out = dst;
                if (row) {   /* no trailing blanks where the last cells are empty */
                    fclose(row);
                    while (blen && buf[blen - 1] == ' ')
                        blen--;
                    fwrite(buf, 1, blen, out);
                    free(buf);
                }
                fputc('\n', out);
            }
            for (i = 0; i < t->ncol; i++) {
                char lead[96];
                const char *v = t->cells[r * t->ncol + i];
                if (!t->below[i] || !*v)
                    continue;
                snprintf(lead, sizeof lead, "%*s  %s: ", indent, "", t->head[i]);
                cli_wrap(out, lead, v, width);
            }
        }
        return;
    }
    /* Too wide: one block per row, "heading: value", values wrapped. */
    for (r = 0; r < t->nrow; r++) {
        if (r)
            fputc('\n', out);
        for (i = 0; i < t->ncol; i++) {
            char lead[96];
            const char *v = t->cells[r * t->ncol + i];
            if (!*v)
                continue;
            snprintf(lead, sizeof lead, "%*s%s%s:%*s ", indent, "", i == 0 ? "" : "  ",
                     t->head[i], (int)(headw - cli_text_width(t->head[i])), "");
            cli_wrap(out, lead, v, width);
        }
    }
}
