/* Signing inside the store: the check a signing act makes before it writes,
 * and the signature row it adds in its transaction. Private to src/store;
 * the public side is fxl/auth.h. */
#ifndef FXL_STORE_AUTH_INT_H
#define FXL_STORE_AUTH_INT_H

#include <stdint.h>

#include "store/ctx.h"

/* FXL_EPERM naming `act` unless the acting user opened their signing key
 * with fxl_sign_begin() for this act. Call before the transaction. */
int fxl_sign_require(fxl_ctx *ctx, const char *act);

/* Signs the row `id` of table `entity` (one of the signed tables of
 * signature.c) with the opened key: meaning such as "levels in force".
 * Inside the caller's write transaction, after the row is written. Adds an
 * audit row 'sign' naming the signature. */
int fxl_signature_add(fxl_ctx *ctx, const char *entity, int64_t id, const char *meaning);

#endif
