/* What a long-running server (fxledger serve) needs from the store beyond
 * the command line's one-shot use: the acting user reset between requests
 * served on one connection, the client's network address stamped on every
 * audit row written for a request; a page reads in one snapshot
 * (fxl_begin_read, fxl/fxl.h). */
#ifndef FXL_SERVER_H
#define FXL_SERVER_H

#include "fxl/fxl.h"

/* Forgets the acting user (fxl_user_login() is NULL again). */
void fxl_clear_user(fxl_ctx *ctx);

/* The client address (IPv4 or IPv6 text, at most 63 bytes) written into the
 * `client` column of every audit row appended on this context until it is
 * cleared with NULL. Longer text is cut. */
void fxl_set_origin(fxl_ctx *ctx, const char *address);
const char *fxl_origin(const fxl_ctx *ctx);   /* "" when none */

#endif
