/* The shared part of the JSON file parsers (see json_doc.h): whole-file
 * reading, text checks, the syntax report, key sets and typed members. No
 * database. */
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fxl/text.h"
#include "io/json_doc.h"

/* ---- reading a whole file ---------------------------------------------------- */

int fxl_jsondoc_read_file(fxl_ctx *ctx, char **out, size_t *len, const char *path,
                          const fxl_jsondoc_file *spec)
{
    int is_stdin = spec->allow_stdin && strcmp(path, "-") == 0;
    FILE *fp = NULL;
    char *buf = NULL, *grown;
    size_t n = 0, cap = 0, got;
    int rc;

    *out = NULL;
    *len = 0;
    if (!(fp = is_stdin ? stdin : fopen(path, "rb"))) {
        /* a missing input file is a data error (exit 2), like any wrong input */
        /* A missing or unreadable input file is a data error (exit 2), like
         * any wrong input: the database is not involved. */
        rc = fxl_fail(ctx, errno == ENOENT || errno == ENOTDIR ? FXL_ENOTFOUND : FXL_EINVAL, spec->open_fail,
                      path, strerror(errno));
        goto cleanup;
    }
    /* Read until the end or one byte past the limit; the buffer grows as the
     * file does (keeping a byte for the NUL), so a small file costs little. */
    for (;;) {
        if (cap - n < 2) {
            size_t want = cap ? cap * 2 : 8192;
            if (want > spec->max_bytes + 2)
                want = spec->max_bytes + 2;
            if (!(grown = realloc(buf, want))) {
                rc = fxl_fail(ctx, FXL_EIO, spec->no_memory, path);
                goto cleanup;
            }
            buf = grown;
            cap = want;
        }
        got = fread(buf + n, 1, cap - 1 - n, fp);
        n += got;
        if (got == 0 || n > spec->max_bytes)
            break;
    }
    if (ferror(fp)) {
        /* a directory (EISDIR) or an unreadable file: wrong input, exit 2 */
        rc = fxl_fail(ctx, FXL_EINVAL, spec->read_fail, path, strerror(errno));
        goto cleanup;
    }
    if (n > spec->max_bytes) {
        rc = fxl_fail(ctx, spec->too_large_code, spec->too_large, path, (int)spec->max_bytes);
        goto cleanup;
    }
    if (n == 0 && spec->empty) {
        rc = fxl_fail(ctx, FXL_EINVAL, spec->empty, path);
        goto cleanup;
    }
    buf[n] = '\0';
    *out = buf;
    *len = n;
    buf = NULL;
    rc = 0;
cleanup:
    if (fp && !is_stdin)
        fclose(fp);
    free(buf);
    return rc;
}

/* ---- the text and its syntax ------------------------------------------------- */

void fxl_jsondoc_line_col(const char *text, size_t pos, int *line, int *col)
{
    size_t i;

    *line = 1;
    *col = 1;
    for (i = 0; i < pos; i++) {
        if (text[i] == '\n') {
            (*line)++;
            *col = 1;
        } else {
            (*col)++;
        }
    }
}

int fxl_jsondoc_check_text(const fxl_jsondoc *d, const char *text, size_t len, unsigned flags)
{
    long bad_utf8 = fxl_utf8_invalid_at(text, len);
    long nul = bad_utf8 >= 0 ? -1 : fxl_json_nul_escape_at(text, len);
    int line, col;

    if (bad_utf8 < 0 && nul < 0)
        return 0;
    if (flags & FXL_JSONDOC_AT_BYTE) {
        if (bad_utf8 >= 0)
            return fxl_fail(d->ctx, FXL_EINVAL, "%s '%s' is not valid: text that is not UTF-8 (at byte %ld)",
                            d->kind, d->name, bad_utf8 + 1);
        return fxl_fail(d->ctx, FXL_EINVAL, "%s '%s' is not valid: an escaped NUL character (\\u0000) at byte %ld",
                        d->kind, d->name, nul + 1);
    }
    fxl_jsondoc_line_col(text, (size_t)(bad_utf8 >= 0 ? bad_utf8 : nul), &line, &col);
    return fxl_fail(d->ctx, FXL_EINVAL, "%s '%s' is not valid: %s at line %d, column %d", d->kind, d->name,
                    bad_utf8 >= 0 ? "text that is not UTF-8" : "an escaped NUL character (\\u0000)", line, col);
}

/* 1 when the text ends inside a string that was never closed: a file cut
 * in the middle of a name or value (cJSON then points at the string start). */
int fxl_jsondoc_ends_inside_string(const char *text, size_t len)
{
    size_t i;
    int in_string = 0;

    for (i = 0; i < len; i++) {
        if (in_string && text[i] == '\\')
            i++;
        else if (text[i] == '"')
            in_string = !in_string;
    }
    return in_string;
}

/* cJSON points at the last byte both when the text ends too early and when
 * that last byte is wrong; parsing again with a sentinel appended tells the
 * two apart: a truncated document now fails at or after the sentinel. */
int fxl_jsondoc_syntax_error(const fxl_jsondoc *d, const char *text, size_t len, unsigned flags)
{
    char *padded = malloc(len + 3);
    const char *err = NULL;
    size_t pos = len;
    cJSON *again;
    int line, col;

    if (!padded)
        return fxl_fail(d->ctx, FXL_EIO, "out of memory reading '%s'", d->name);
    memcpy(padded, text, len);
    memcpy(padded + len, " @", 3);
    again = cJSON_ParseWithLengthOpts(padded, len + 2, &err, 0);
    cJSON_Delete(again);
    if (!err)
        err = cJSON_GetErrorPtr();
    if (err && err >= padded && err <= padded + len + 2)
        pos = (size_t)(err - padded);
    free(padded);
    /* A string opened just before the error and never closed: cut mid-string. */
    if ((flags & FXL_JSONDOC_CUT_AT_QUOTE) && pos < len && pos > 0 && text[pos - 1] == '"' &&
        !memchr(text + pos, '"', len - pos))
        pos = len;
    /* Every reader: a file cut inside a string is truncated, whatever the
     * flags (FXL_JSONDOC_CUT_IN_STRING is kept for the callers that name it). */
    (void)FXL_JSONDOC_CUT_IN_STRING;
    if (fxl_jsondoc_ends_inside_string(text, len)) {
        fxl_jsondoc_line_col(text, len, &line, &col);
        return fxl_fail(d->ctx, FXL_EINVAL,
                        "%s '%s': malformed JSON: the file ends too early at line %d, column %d, inside a "
                        "string (truncated)", d->kind, d->name, line, col);
    }
    if (pos >= len) {
        fxl_jsondoc_line_col(text, len, &line, &col);
        return fxl_fail(d->ctx, FXL_EINVAL,
                        "%s '%s': malformed JSON: the file ends too early at line %d, column %d (truncated?)",
                        d->kind, d->name, line, col);
    }
    fxl_jsondoc_line_col(text, pos, &line, &col);
    return fxl_fail(d->ctx, FXL_EINVAL, "%s '%s': malformed JSON at line %d, column %d near '%.*s'", d->kind,
                    d->name, line, col, (int)(len - pos < 12 ? len - pos : 12), text + pos);
}

int fxl_jsondoc_parse(const fxl_jsondoc *d, cJSON **root, const char *text, size_t len, unsigned flags)
{
    const char *end = NULL;
    size_t pos;
    int rc, line, col;

    *root = NULL;
    if ((rc = fxl_jsondoc_check_text(d, text, len, flags)) != 0)
        return rc;
    if (!(*root = cJSON_ParseWithLengthOpts(text, len, &end, 0)))
        return fxl_jsondoc_syntax_error(d, text, len, flags);
    if (!(flags & FXL_JSONDOC_NO_TRAILING))
        return 0;
    for (pos = end ? (size_t)(end - text) : len; pos < len; pos++) {
        if (!(text[pos] == ' ' || text[pos] == '\t' || text[pos] == '\r' || text[pos] == '\n' ||
              text[pos] == '\0')) {
            cJSON_Delete(*root);
            *root = NULL;
            fxl_jsondoc_line_col(text, pos, &line, &col);
            return fxl_fail(d->ctx, FXL_EINVAL,
                            "%s '%s': malformed JSON: unexpected text after the document at line %d, column %d",
                            d->kind, d->name, line, col);
        }
    }
    return 0;
}

/* ---- members ----------------------------------------------------------------- */

const cJSON *fxl_jsondoc_bad_key(const cJSON *obj, const char *const *allowed, int *twice)
{
    const cJSON *a, *b;
    const char *const *k;

    *twice = 0;
    for (a = obj->child; a; a = a->next) {
        int known = 0;
        for (k = allowed; *k; k++)
            if (strcmp(a->string, *k) == 0)
                known = 1;
        if (!known)
            return a;
        for (b = a->next; b; b = b->next) {
            if (strcmp(a->string, b->string) == 0) {
                *twice = 1;
                return a;
            }
        }
    }
    return NULL;
}

int fxl_jsondoc_check_keys(const fxl_jsondoc *d, const char *where, const cJSON *obj,
                           const char *const *allowed)
{
    int twice;
    const cJSON *bad = fxl_jsondoc_bad_key(obj, allowed, &twice);

    if (!bad)
        return 0;
    if (twice)
        return fxl_fail(d->ctx, FXL_EINVAL, "%s '%s': %s: key '%s' appears twice", d->kind, d->name, where,
                        bad->string);
    return fxl_fail(d->ctx, FXL_EINVAL, "%s '%s': %s: unknown key '%s'", d->kind, d->name, where, bad->string);
}

/* The member `key`, or NULL when it is absent (or null, with NULL_ABSENT). */
static const cJSON *member(const cJSON *obj, const char *key, unsigned flags)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(obj, key);

    if (v && (flags & FXL_JSONDOC_NULL_ABSENT) && cJSON_IsNull(v))
        return NULL;
    return v;
}

int fxl_jsondoc_get_string(const fxl_jsondoc *d, char *buf, size_t bufsize, const char *where,
                           const cJSON *obj, const char *key, unsigned flags, size_t max_len)
{
    const cJSON *v = member(obj, key, flags);
    int min_len = (flags & (FXL_JSONDOC_REQUIRED | FXL_JSONDOC_NONEMPTY)) ? 1 : 0;
    size_t len;

    buf[0] = '\0';
    if (!v) {
        if (flags & FXL_JSONDOC_REQUIRED)
            return fxl_fail(d->ctx, FXL_EINVAL, "%s '%s': %s: '%s' is missing", d->kind, d->name, where, key);
        return 0;
    }
    if (!cJSON_IsString(v) || !v->valuestring)
        return fxl_fail(d->ctx, FXL_EINVAL, "%s '%s': %s: '%s' must be a string", d->kind, d->name, where, key);
    len = strlen(v->valuestring);
    if (len < (size_t)min_len || len > max_len || len >= bufsize)
        return fxl_fail(d->ctx, FXL_EINVAL, "%s '%s': %s: '%s' must be %d to %zu characters", d->kind, d->name,
                        where, key, min_len, max_len);
    if (!(flags & FXL_JSONDOC_CONTROL_OK) && fxl_text_control_at(v->valuestring) >= 0)
        return fxl_fail(d->ctx, FXL_EINVAL, "%s '%s': %s: '%s' must not contain control characters", d->kind,
                        d->name, where, key);
    memcpy(buf, v->valuestring, len + 1);
    return 0;
}

int fxl_jsondoc_get_number(const fxl_jsondoc *d, double *out, const char *where, const cJSON *obj,
                           const char *key, unsigned flags, const char *accepted)
{
    const cJSON *v = member(obj, key, flags);

    *out = NAN;
    if (!v) {
        if (flags & FXL_JSONDOC_REQUIRED)
            return fxl_fail(d->ctx, FXL_EINVAL, "%s '%s': %s: '%s' is missing (%s)", d->kind, d->name, where,
                            key, accepted);
        return 0;
    }
    if (!cJSON_IsNumber(v) || !isfinite(v->valuedouble))
        return fxl_fail(d->ctx, FXL_EINVAL, "%s '%s': %s: '%s' must be a number (%s)", d->kind, d->name, where,
                        key, accepted);
    *out = v->valuedouble;
    return 0;
}

int fxl_jsondoc_check_format(const fxl_jsondoc *d, const char *where, const cJSON *root,
                             unsigned string_flags, const char *format, int version)
{
    const cJSON *v;
    char found[64];
    int rc;

    if ((rc = fxl_jsondoc_get_string(d, found, sizeof found, where, root, "format", string_flags,
                                     sizeof found - 1)) != 0)
        return rc;
    if (strcmp(found, format) != 0)
        return fxl_fail(d->ctx, FXL_EINVAL, "%s '%s': 'format' is '%s', expected '%s'", d->kind, d->name, found,
                        format);
    v = cJSON_GetObjectItemCaseSensitive(root, "version");
    if (!cJSON_IsNumber(v) || v->valuedouble != version)
        return fxl_fail(d->ctx, FXL_EINVAL, "%s '%s': 'version' must be %d", d->kind, d->name, version);
    return 0;
}
