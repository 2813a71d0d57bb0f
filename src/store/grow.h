/* Growing the arrays that store listings fill row by row. Private to
 * src/store. */
#ifndef FXL_STORE_GROW_H
#define FXL_STORE_GROW_H

#include <stddef.h>

#include "fxl/fxl.h"

/* Makes room in *list (elements of elem_size bytes, *cap of them allocated)
 * for element number `count`, i.e. for count + 1 elements: nothing to do
 * while count < *cap, else the array doubles (16 to start with) and the new
 * elements are zeroed. On failure *list and *cap are left as they were (the
 * caller still frees *list) and FXL_EIO is returned with the message
 * "out of memory <what>", e.g. what = "listing detectors". */
int fxl_grow(fxl_ctx *ctx, void **list, size_t *cap, size_t count, size_t elem_size, const char *what);

#endif
