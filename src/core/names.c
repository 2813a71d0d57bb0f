/* Compared forms of person names: NFC, full case folding, spaces collapsed
 * (include/fxl/names.h). utf8proc does the Unicode work from the Unicode
 * Character Database it ships; spaces are collapsed here. */
#include <stdlib.h>
#include <string.h>
#include <utf8proc.h>

#include "fxl/fxl.h"
#include "fxl/names.h"

/* White space of any kind (Unicode general category Zs, and tab, line feed,
 * carriage return) counts as one space. */
static int is_space(utf8proc_int32_t c)
{
    return c == '\t' || c == '\n' || c == '\r' || utf8proc_category(c) == UTF8PROC_CATEGORY_ZS;
}

int fxl_name_key(char *out, size_t size, const char *name)
{
    utf8proc_uint8_t *mapped = NULL;
    utf8proc_ssize_t n, i = 0;
    size_t len = 0;
    int pending = 0, rc = FXL_EINVAL;

    if (!out || size == 0)
        return FXL_EINVAL;
    out[0] = '\0';
    if (!name)
        return 0;
    /* NFC (COMPOSE with STABLE) and the full default case folding. */
    n = utf8proc_map((const utf8proc_uint8_t *)name, 0, &mapped,
                     UTF8PROC_NULLTERM | UTF8PROC_STABLE | UTF8PROC_COMPOSE | UTF8PROC_CASEFOLD);
    if (n < 0)
        goto cleanup;
    while (i < n) {
        utf8proc_int32_t c;
        utf8proc_ssize_t step = utf8proc_iterate(mapped + i, n - i, &c);

        if (step <= 0)
            goto cleanup;
        if (is_space(c)) {
            pending = len > 0;
        } else {
            if (pending) {
                if (len + 1 >= size)
                    goto cleanup;
                out[len++] = ' ';
                pending = 0;
            }
            if (len + (size_t)step >= size)
                goto cleanup;
            memcpy(out + len, mapped + i, (size_t)step);
            len += (size_t)step;
        }
        i += step;
    }
    out[len] = '\0';
    rc = 0;
cleanup:
    if (rc != 0)
        out[0] = '\0';
    free(mapped);
    return rc;
}

int fxl_name_same(const char *a, const char *b)
{
    char ka[FXL_NAME_KEY_MAX], kb[FXL_NAME_KEY_MAX];

    if (fxl_name_key(ka, sizeof ka, a) != 0 || fxl_name_key(kb, sizeof kb, b) != 0)
        return 0;
    return strcmp(ka, kb) == 0;
}
