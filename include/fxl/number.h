/* The one parser of decimal numbers typed by a person or read from a file as
 * text (options, prompts, settings, DICOM DS/IS strings): plain decimal only,
 *     [+-] digits [. digits] [(e|E) [+-] digits]     or  [+-] . digits [...]
 * No hexadecimal (0xB, 0x1.7b8p3), no inf/nan, no trailing garbage, no
 * spaces unless FXL_NUM_SPACES (DICOM DS: leading and trailing spaces are
 * allowed, PS3.5 section 6.2), and the value must be finite. Pure, no I/O. */
#ifndef FXL_NUMBER_H
#define FXL_NUMBER_H

#include <stddef.h>

#define FXL_NUM_SPACES 1     /* accept leading and trailing spaces */
#define FXL_NUM_WHOLE 2      /* digits only: no point, no exponent (counts, ids, fraction numbers) */

enum {
    FXL_NUM_OK = 0,
    FXL_NUM_EMPTY = 1,       /* nothing given */
    FXL_NUM_SYNTAX = 2,      /* not a plain decimal number (hex, inf, garbage, ...) */
    FXL_NUM_OVERFLOW = 3,    /* too large for a double */
    FXL_NUM_RANGE = 4        /* outside [lo, hi] (fxl_number_in_range) */
};

/* Parses `text` into *out; returns FXL_NUM_OK or one of the codes above. */
int fxl_number_parse(double *out, const char *text, int flags);

/* fxl_number_parse, then lo <= value <= hi. */
int fxl_number_in_range(double *out, const char *text, int flags, double lo, double hi);

/* The message for a failure code, naming the field, the text (made
 * printable), the accepted range and the unit, e.g.
 *   "reading '0x1A' is not a number (0 to 1000 nC)"
 * unit may be "" or NULL. */
void fxl_number_message(char *buf, size_t size, int code, const char *field, const char *text,
                        double lo, double hi, const char *unit);

#endif
