/* The strict decimal parser (include/fxl/number.h). strtod alone accepts
 * hexadecimal floats, "inf", "nan" and leading spaces; the grammar is checked
 * first and strtod only converts text that is plain decimal. */
#include "fxl/number.h"

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/text.h"

static int is_digit(char c)
{
    return c >= '0' && c <= '9';
}

int fxl_number_parse(double *out, const char *text, int flags)
{
    char buf[128];
    const char *p, *end;
    size_t len, digits = 0;
    double v;

    if (!text)
        return FXL_NUM_EMPTY;
    p = text;
    end = text + strlen(text);
    if (flags & FXL_NUM_SPACES) {
        while (*p == ' ')
            p++;
        while (end > p && end[-1] == ' ')
            end--;
    }
    if (p == end)
        return FXL_NUM_EMPTY;
    len = (size_t)(end - p);
    if (len >= sizeof buf)
        return FXL_NUM_SYNTAX;
    memcpy(buf, p, len);
    buf[len] = '\0';
    p = buf;
    if (*p == '+' || *p == '-')
        p++;
    while (is_digit(*p)) {
        p++;
        digits++;
    }
    if (*p == '.' && !(flags & FXL_NUM_WHOLE)) {
        p++;
        while (is_digit(*p)) {
            p++;
            digits++;
        }
    }
    if (digits == 0)
        return FXL_NUM_SYNTAX;
    if ((*p == 'e' || *p == 'E') && !(flags & FXL_NUM_WHOLE)) {
        size_t exp_digits = 0;
        p++;
        if (*p == '+' || *p == '-')
            p++;
        while (is_digit(*p)) {
            p++;
            exp_digits++;
        }
        if (exp_digits == 0)
            return FXL_NUM_SYNTAX;
    }
    if (*p != '\0')
        return FXL_NUM_SYNTAX;
    errno = 0;
    v = strtod(buf, NULL);
    if (!isfinite(v) || (errno == ERANGE && fabs(v) > 1.0))
        return FXL_NUM_OVERFLOW;
    *out = v == 0 ? 0.0 : v;   /* no negative zero in the record */
    return FXL_NUM_OK;
}

int fxl_number_in_range(double *out, const char *text, int flags, double lo, double hi)
{
    double v = 0;
    int rc = fxl_number_parse(&v, text, flags);

    if (rc != FXL_NUM_OK)
        return rc;
    if (!(v >= lo && v <= hi))
        return FXL_NUM_RANGE;
    *out = v;
    return FXL_NUM_OK;
}

void fxl_number_message(char *buf, size_t size, int code, const char *field, const char *text,
                        double lo, double hi, const char *unit)
{
    char shown[80];
    const char *u = unit && *unit ? unit : "";
    const char *sp = *u ? " " : "";

    fxl_text_printable(shown, sizeof shown, text);
    switch (code) {
    case FXL_NUM_EMPTY:
        snprintf(buf, size, "%s is required (%g to %g%s%s)", field, lo, hi, sp, u);
        break;
    case FXL_NUM_RANGE:
        snprintf(buf, size, "%s '%s' is out of range: must be %g to %g%s%s", field, shown, lo, hi, sp, u);
        break;
    case FXL_NUM_OVERFLOW:
        snprintf(buf, size, "%s '%s' is out of range: must be %g to %g%s%s", field, shown, lo, hi, sp, u);
        break;
    default:
        snprintf(buf, size, "%s '%s' is not a number (%g to %g%s%s)", field,
                 shown, lo, hi, sp, u);
        break;
    }
}
