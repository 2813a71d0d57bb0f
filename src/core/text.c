/* UTF-8 validity (RFC 3629), control characters and printable copies of
 * outside text. Keeps invalid bytes out of the database, JSON output and
 * reports, and terminal control sequences off the therapist's screen. */
#include "fxl/text.h"

#include <string.h>

/* Length of the valid UTF-8 sequence starting at s[i] (1 to 4), or 0. */
static size_t utf8_seq(const unsigned char *s, size_t i, size_t len)
{
    unsigned char c = s[i];
    size_t n, k;
    unsigned long cp;

    if (c < 0x80)
        return 1;
    if (c >= 0xc2 && c <= 0xdf) {
        n = 2;
        cp = c & 0x1f;
    } else if (c >= 0xe0 && c <= 0xef) {
        n = 3;
        cp = c & 0x0f;
    } else if (c >= 0xf0 && c <= 0xf4) {
        n = 4;
        cp = c & 0x07;
    } else {
        return 0;  /* continuation byte, 0xc0/0xc1 (overlong) or 0xf5..0xff */
    }
    if (i + n > len)
        return 0;
    for (k = 1; k < n; k++) {
        if ((s[i + k] & 0xc0) != 0x80)
            return 0;
        cp = (cp << 6) | (s[i + k] & 0x3f);
    }
    if ((n == 3 && cp < 0x800) || (n == 4 && cp < 0x10000) || cp > 0x10ffff ||
        (cp >= 0xd800 && cp <= 0xdfff))
        return 0;
    return n;
}

long fxl_utf8_invalid_at(const char *s, size_t len)
{
    const unsigned char *u = (const unsigned char *)s;
    size_t i = 0, n;

    while (i < len) {
        if ((n = utf8_seq(u, i, len)) == 0)
            return (long)i;
        i += n;
    }
    return -1;
}

long fxl_text_control_at(const char *s)
{
    const unsigned char *u = (const unsigned char *)s;
    size_t i;

    for (i = 0; u && u[i]; i++) {
        if (u[i] < 0x20 || u[i] == 0x7f)
            return (long)i;
        /* C1 controls are U+0080..U+009F: 0xC2 0x80..0x9F in UTF-8. */
        if (u[i] == 0xc2 && u[i + 1] >= 0x80 && u[i + 1] <= 0x9f)
            return (long)i;
    }
    return -1;
}

long fxl_json_nul_escape_at(const char *s, size_t len)
{
    size_t i, back;

    for (i = 0; i + 6 <= len; i++) {
        if (s[i] != '\\' || s[i + 1] != 'u' || memcmp(s + i + 2, "0000", 4) != 0)
            continue;
        for (back = 0; back < i && s[i - 1 - back] == '\\'; back++)
            ;
        if (back % 2 == 0)  /* this backslash is not itself escaped */
            return (long)i;
    }
    return -1;
}

void fxl_text_printable(char *out, size_t out_size, const char *s)
{
    const unsigned char *u = (const unsigned char *)s;
    size_t len = s ? strlen(s) : 0, i = 0, o = 0, keep = 0, n, w;
    int bad;

    if (out_size < 4) {
        if (out_size)
            out[0] = '\0';
        return;
    }
    while (i < len) {
        n = utf8_seq(u, i, len);
        /* an invalid byte or a control character shows as one '?' */
        bad = n == 0 || u[i] < 0x20 || u[i] == 0x7f || (n == 2 && u[i] == 0xc2 && u[i + 1] <= 0x9f);
        w = bad ? 1 : n;
        if (o + w > out_size - 1)
            break;
        if (bad)
            out[o] = '?';
        else
            memcpy(out + o, s + i, n);
        o += w;
        i += n ? n : 1;
        if (o <= out_size - 4)
            keep = o;  /* where "..." could still follow a whole character */
    }
    if (i < len) {
        o = keep;
        memcpy(out + o, "...", 3);
        o += 3;
    }
    out[o] = '\0';
}

/* Code point at s (valid UTF-8 assumed) and its length in *n. */
static unsigned long decode(const unsigned char *s, size_t *n)
{
    if (s[0] < 0x80) {
        *n = 1;
        return s[0];
    }
    if ((s[0] & 0xe0) == 0xc0 && s[1]) {
        *n = 2;
        return ((unsigned long)(s[0] & 0x1f) << 6) | (s[1] & 0x3f);
    }
    if ((s[0] & 0xf0) == 0xe0 && s[1] && s[2]) {
        *n = 3;
        return ((unsigned long)(s[0] & 0x0f) << 12) | ((unsigned long)(s[1] & 0x3f) << 6) | (s[2] & 0x3f);
    }
    if ((s[0] & 0xf8) == 0xf0 && s[1] && s[2] && s[3]) {
        *n = 4;
        return ((unsigned long)(s[0] & 0x07) << 18) | ((unsigned long)(s[1] & 0x3f) << 12) |
               ((unsigned long)(s[2] & 0x3f) << 6) | (s[3] & 0x3f);
    }
    *n = 1;
    return 0xfffd;
}

static int is_bidi(unsigned long cp)
{
    return cp == 0x061c || cp == 0x200e || cp == 0x200f || (cp >= 0x202a && cp <= 0x202e) ||
           (cp >= 0x2066 && cp <= 0x2069);
}

static int is_zero_width(unsigned long cp)
{
    return cp == 0x200b || cp == 0x200c || cp == 0x200d || cp == 0x2060 || cp == 0xfeff ||
           cp == 0x180e || cp == 0x00ad;
}

static long find_cp(const char *s, int (*pred)(unsigned long))
{
    const unsigned char *u = (const unsigned char *)s;
    size_t i = 0, n;

    while (u && u[i]) {
        if (pred(decode(u + i, &n)))
            return (long)i;
        i += n;
    }
    return -1;
}

long fxl_text_bidi_at(const char *s)
{
    return find_cp(s, is_bidi);
}

long fxl_text_zero_width_at(const char *s)
{
    return find_cp(s, is_zero_width);
}

static int fail(const char **why, long *at, const char *reason, long where)
{
    if (why)
        *why = reason;
    if (at)
        *at = where;
    return -1;
}

int fxl_text_name_check(const char *s, const char **why, long *at)
{
    long b;

    if (!s)
        return 0;
    if ((b = fxl_utf8_invalid_at(s, strlen(s))) >= 0)
        return fail(why, at, "is not valid UTF-8 text", b);
    if ((b = fxl_text_control_at(s)) >= 0)
        return fail(why, at, "contains a control character", b);
    if ((b = fxl_text_bidi_at(s)) >= 0)
        return fail(why, at, "contains a bidirectional control character", b);
    return 0;
}

int fxl_text_identifier_check(const char *s, const char **why, long *at)
{
    size_t len;
    long b;

    if (!s)
        return 0;
    if (fxl_text_name_check(s, why, at) != 0)
        return -1;
    if ((b = fxl_text_zero_width_at(s)) >= 0)
        return fail(why, at, "contains a zero-width character", b);
    len = strlen(s);
    if (len && (s[0] == ' ' || (len >= 2 && (unsigned char)s[0] == 0xc2 && (unsigned char)s[1] == 0xa0)))
        return fail(why, at, "starts with a space", 0);
    if (len && (s[len - 1] == ' ' ||
                (len >= 2 && (unsigned char)s[len - 2] == 0xc2 && (unsigned char)s[len - 1] == 0xa0)))
        return fail(why, at, "ends with a space", (long)len - 1);
    return 0;
}
