/* What the JSON file parsers of src/io share: reading a whole file with a
 * size limit, the checks on the raw text, the syntax report with line and
 * column, refusing unknown and repeated keys, and typed members with their
 * messages. Private to src/io; each parser keeps its own wording through the
 * `kind` of its document and the message formats it passes in. */
#ifndef FXL_IO_JSON_DOC_H
#define FXL_IO_JSON_DOC_H

#include <cjson/cJSON.h>
#include <stddef.h>

#include "fxl/fxl.h"

/* A document being parsed: every message starts "<kind> '<name>'", e.g.
 * "readings file 'day1.json': ...". All three are borrowed. */
typedef struct fxl_jsondoc {
    fxl_ctx *ctx;
    const char *kind;   /* "file", "readings file", "plan file" */
    const char *name;   /* the file name (or the caller's source label) */
} fxl_jsondoc;

/* ---- reading a whole file ---------------------------------------------------- */

/* How a file is read and what each failure says. Every format is a printf
 * format that is given the arguments named beside it (a format may leave the
 * trailing ones unused). */
typedef struct fxl_jsondoc_file {
    size_t max_bytes;         /* a file of more bytes is refused */
    int allow_stdin;          /* path "-" reads standard input */
    int too_large_code;       /* FXL_EINVAL or FXL_EIO for a file over max_bytes */
    const char *open_fail;    /* FXL_EIO: (path, strerror(errno)) */
    const char *read_fail;    /* FXL_EIO: (path, strerror(errno)) */
    const char *too_large;    /* too_large_code: (path, (int)max_bytes) */
    const char *no_memory;    /* FXL_EIO: (path) */
    const char *empty;        /* FXL_EINVAL: (path); NULL passes an empty file on */
} fxl_jsondoc_file;

/* Reads all of `path` into *out (malloc'ed, NUL-terminated after *len bytes;
 * the caller frees it, also when it holds no bytes). Returns 0, or the
 * failure with the message from `spec` set on ctx and *out NULL. */
int fxl_jsondoc_read_file(fxl_ctx *ctx, char **out, size_t *len, const char *path,
                          const fxl_jsondoc_file *spec);

/* ---- the text and its syntax ------------------------------------------------- */

/* Line and column (both from 1) of byte offset `pos` in text. */
void fxl_jsondoc_line_col(const char *text, size_t pos, int *line, int *col);

/* Flags of fxl_jsondoc_check_text and fxl_jsondoc_parse. */
enum {
    FXL_JSONDOC_AT_BYTE = 1,        /* bad text named by byte offset, not by line and column */
    FXL_JSONDOC_NO_TRAILING = 2,    /* anything but white space after the document is an error */
    FXL_JSONDOC_CUT_AT_QUOTE = 4,   /* a quote just before the error, none after: truncated */
    FXL_JSONDOC_CUT_IN_STRING = 8   /* text that ends inside a string: truncated (now always so) */
};

/* FXL_EINVAL when text[0..len) is not UTF-8 or holds the escape "\u0000"
 * (which would silently cut a C string short): "<kind> '<name>' is not valid:
 * ..." at a byte offset (FXL_JSONDOC_AT_BYTE) or a line and column. */
int fxl_jsondoc_check_text(const fxl_jsondoc *d, const char *text, size_t len, unsigned flags);

/* 1 when text[0..len) ends inside a string that was never closed (a file
 * cut in the middle of a name or a value), else 0. */
int fxl_jsondoc_ends_inside_string(const char *text, size_t len);

/* The report for text that cJSON refused: a file that ends inside a string
 * is always reported as truncated; where it stops, or that the file
 * ends too early (truncated). Always returns a negative FXL_E* code. */
int fxl_jsondoc_syntax_error(const fxl_jsondoc *d, const char *text, size_t len, unsigned flags);

/* Checks the text (fxl_jsondoc_check_text) and parses it into *root (the
 * caller frees it with cJSON_Delete). Returns 0, or FXL_EINVAL with the
 * position of the error (FXL_EIO when memory runs out), *root NULL. */
int fxl_jsondoc_parse(const fxl_jsondoc *d, cJSON **root, const char *text, size_t len, unsigned flags);

/* ---- members ----------------------------------------------------------------- */

/* The first member of obj whose key is not in `allowed` (NULL-terminated),
 * or that a later member repeats (*twice set to 1); NULL when all is well. */
const cJSON *fxl_jsondoc_bad_key(const cJSON *obj, const char *const *allowed, int *twice);

/* FXL_EINVAL for an unknown or a repeated key of obj:
 * "<kind> '<name>': <where>: unknown key 'k'" / "key 'k' appears twice". */
int fxl_jsondoc_check_keys(const fxl_jsondoc *d, const char *where, const cJSON *obj,
                           const char *const *allowed);

/* Flags of the typed getters. */
enum {
    FXL_JSONDOC_REQUIRED = 1,      /* absent is an error */
    FXL_JSONDOC_NULL_ABSENT = 2,   /* a JSON null counts as absent (else: wrong type) */
    FXL_JSONDOC_NONEMPTY = 4,      /* "" is refused even when the member is optional */
    FXL_JSONDOC_CONTROL_OK = 8     /* control characters are accepted in a string */
};

/* A string member of 0 (1 if required or NONEMPTY) to max_len characters
 * copied into buf[bufsize] (a longer one than bufsize - 1 is refused too);
 * "" when optional and absent. */
int fxl_jsondoc_get_string(const fxl_jsondoc *d, char *buf, size_t bufsize, const char *where,
                           const cJSON *obj, const char *key, unsigned flags, size_t max_len);

/* A finite number member into *out; NaN when optional and absent. `accepted`
 * describes the accepted values in the messages ("'k' is missing (...)",
 * "'k' must be a number (...)"). No range check: the caller owns that. */
int fxl_jsondoc_get_number(const fxl_jsondoc *d, double *out, const char *where, const cJSON *obj,
                           const char *key, unsigned flags, const char *accepted);

/* The "format" string member of root (read with fxl_jsondoc_get_string,
 * `string_flags` and at most 63 characters) must be `format`, and the
 * "version" number must be `version`. */
int fxl_jsondoc_check_format(const fxl_jsondoc *d, const char *where, const cJSON *root,
                             unsigned string_flags, const char *format, int version);

#endif
