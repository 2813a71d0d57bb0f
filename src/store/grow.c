/* The one growth rule of the arrays store listings fill (see grow.h). */
#include <stdlib.h>
#include <string.h>

#include "store/grow.h"

int fxl_grow(fxl_ctx *ctx, void **list, size_t *cap, size_t count, size_t elem_size, const char *what)
{
    size_t ncap;
    void *p;

    if (count < *cap)
        return 0;
    ncap = *cap ? *cap * 2 : 16;
    while (ncap <= count)
        ncap *= 2;
    if (ncap > (size_t)-1 / elem_size || !(p = realloc(*list, ncap * elem_size)))
        return fxl_fail(ctx, FXL_EIO, "out of memory %s", what);
    memset((char *)p + *cap * elem_size, 0, (ncap - *cap) * elem_size);
    *list = p;
    *cap = ncap;
    return 0;
}
