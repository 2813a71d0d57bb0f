/* The page formatter: a growable buffer, the three escapers (HTML text,
 * attribute, URL component) and web_printf, whose conversions choose the
 * escaping by context, so text from a request or the database never reaches
 * a page by concatenation. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "web/web.h"

void web_buf_release(web_buf *b)
{
    free(b->data);
    b->data = NULL;
    b->len = b->cap = 0;
}

void web_buf_add(web_buf *b, const void *data, size_t len)
{
    if (b->failed)
        return;
    if (b->len + len + 1 > b->cap) {
        size_t cap = b->cap ? b->cap : 4096;
        char *p;
        while (cap < b->len + len + 1)
            cap *= 2;
        if (!(p = realloc(b->data, cap))) {
            b->failed = 1;
            return;
        }
        b->data = p;
        b->cap = cap;
    }
    memcpy(b->data + b->len, data, len);
    b->len += len;
    b->data[b->len] = '\0';
}

static void add_str(web_buf *b, const char *s)
{
    web_buf_add(b, s, strlen(s));
}

/* Length of the valid UTF-8 sequence at s (1..4), or 0 if invalid. The
 * decoded code point goes to *cp. Overlong forms and surrogates are invalid
 * (RFC 3629 section 3). */
static size_t utf8_seq(const unsigned char *s, unsigned long *cp)
{
    unsigned long c;
    size_t n, i;

    if (s[0] < 0x80) {
        *cp = s[0];
        return 1;
    }
    if (s[0] >= 0xC2 && s[0] <= 0xDF) {
        n = 2;
        c = s[0] & 0x1F;
    } else if (s[0] >= 0xE0 && s[0] <= 0xEF) {
        n = 3;
        c = s[0] & 0x0F;
    } else if (s[0] >= 0xF0 && s[0] <= 0xF4) {
        n = 4;
        c = s[0] & 0x07;
    } else {
        return 0;
    }
    for (i = 1; i < n; i++) {
        if ((s[i] & 0xC0) != 0x80)
            return 0;
        c = (c << 6) | (s[i] & 0x3F);
    }
    if ((n == 3 && c < 0x800) || (n == 4 && (c < 0x10000 || c > 0x10FFFF)) ||
        (c >= 0xD800 && c <= 0xDFFF))
        return 0;
    *cp = c;
    return n;
}

/* The characters that reorder displayed text (Unicode UAX #9: embeddings,
 * overrides, isolates, marks) and the invisible ones often used to disguise a
 * name; shown as a visible code so a record cannot masquerade. */
static int is_disguise(unsigned long cp)
{
    return (cp >= 0x202A && cp <= 0x202E) || (cp >= 0x2066 && cp <= 0x2069) ||
           cp == 0x200E || cp == 0x200F || cp == 0x061C || (cp >= 0x200B && cp <= 0x200D) ||
           cp == 0xFEFF || cp == 0x2028 || cp == 0x2029;
}

/* Shared by text and attribute: entities for the five markup characters
 * (and the backtick), U+FFFD for invalid bytes, control characters dropped
 * (tab and newline kept in text, turned into a space in attributes). */
static void escape_markup(web_buf *b, const char *str, int attr)
{
    const unsigned char *s = (const unsigned char *)(str ? str : "");
    const unsigned char *run = s;

    while (*s) {
        unsigned long cp = 0;
        size_t n = utf8_seq(s, &cp);
        const char *rep = NULL;
        char code[16];

        if (n == 1) {
            switch (*s) {
            case '&': rep = "&amp;"; break;
            case '<': rep = "&lt;"; break;
            case '>': rep = "&gt;"; break;
            case '"': rep = "&quot;"; break;
            case '\'': rep = "&#39;"; break;
            case '`': rep = "&#96;"; break;
            case '\t':
            case '\n': rep = attr ? " " : NULL; break;
            default:
                if (*s < 0x20 || *s == 0x7F)
                    rep = "";
            }
        } else if (n == 0) {
            rep = "\xEF\xBF\xBD";
            n = 1;
        } else if ((cp >= 0x80 && cp < 0xA0) || is_disguise(cp)) {
            if (cp >= 0x80 && cp < 0xA0)
                rep = "";
            else {
                snprintf(code, sizeof code, "[U+%04lX]", cp);
                rep = code;
            }
        }
        if (rep) {
            web_buf_add(b, run, (size_t)(s - run));
            add_str(b, rep);
            s += n;
            run = s;
        } else {
            s += n;
        }
    }
    web_buf_add(b, run, (size_t)(s - run));
}

void web_escape_text(web_buf *b, const char *s)
{
    escape_markup(b, s, 0);
}

void web_escape_attr(web_buf *b, const char *s)
{
    escape_markup(b, s, 1);
}

/* RFC 3986 section 2.3: only the unreserved characters stay as they are. */
void web_escape_url(web_buf *b, const char *str)
{
    static const char hex[] = "0123456789ABCDEF";
    const unsigned char *s = (const unsigned char *)(str ? str : "");

    for (; *s; s++) {
        if ((*s >= 'A' && *s <= 'Z') || (*s >= 'a' && *s <= 'z') || (*s >= '0' && *s <= '9') ||
            *s == '-' || *s == '.' || *s == '_' || *s == '~') {
            web_buf_add(b, s, 1);
        } else {
            char enc[3] = {'%', hex[*s >> 4], hex[*s & 15]};
            web_buf_add(b, enc, 3);
        }
    }
}

void web_vprintf(web_buf *b, const char *fmt, va_list ap)
{
    const char *p = fmt, *run = fmt;
    char num[64];

    while (*p) {
        int prec = -1;
        if (*p != '%') {
            p++;
            continue;
        }
        web_buf_add(b, run, (size_t)(p - run));
        p++;
        if (*p == '.' && p[1] >= '0' && p[1] <= '9') {
            prec = p[1] - '0';
            p += 2;
        }
        switch (*p) {
        case 'h': web_escape_text(b, va_arg(ap, const char *)); break;
        case 'a': web_escape_attr(b, va_arg(ap, const char *)); break;
        case 'u': web_escape_url(b, va_arg(ap, const char *)); break;
        case 's': {
            const char *s = va_arg(ap, const char *);
            add_str(b, s ? s : "");
            break;
        }
        case 'd':
            snprintf(num, sizeof num, "%d", va_arg(ap, int));
            add_str(b, num);
            break;
        case 'L':
            snprintf(num, sizeof num, "%lld", (long long)va_arg(ap, int64_t));
            add_str(b, num);
            break;
        case 'l':
            if (p[1] == 'd') {
                p++;
                snprintf(num, sizeof num, "%ld", va_arg(ap, long));
                add_str(b, num);
            }
            break;
        case 'f': {
            double v = va_arg(ap, double);
            if (!isfinite(v))
                add_str(b, "\xE2\x80\x94");
            else {
                snprintf(num, sizeof num, "%.*f", prec < 0 ? 2 : prec, v);
                add_str(b, num);
            }
            break;
        }
        case '%': add_str(b, "%"); break;
        default:
            /* An unknown conversion is a programming error: print nothing of
             * the argument list rather than guess its type. */
            return;
        }
        if (*p)
            p++;
        run = p;
    }
    web_buf_add(b, run, (size_t)(p - run));
}

void web_printf(web_buf *b, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    web_vprintf(b, fmt, ap);
    va_end(ap);
}
