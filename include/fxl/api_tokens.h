/* Per-user API tokens for other department systems calling the console's
 * JSON API (docs/api.md): an admin issues a token for a user (it acts with
 * that user's role) and can revoke it. Random 256 bits shown once as 64 hex
 * digits; only its SHA-256 is stored. Issuing and revoking are audit rows. */
#ifndef FXL_API_TOKENS_H
#define FXL_API_TOKENS_H

#include <stddef.h>
#include <stdint.h>

#include "fxl/fxl.h"

#define FXL_API_TOKEN_HEX_LEN 64
#define FXL_API_TOKEN_LABEL_MAX 64

typedef struct fxl_api_token {
    int64_t id;
    char login[65];              /* the user it acts as */
    char label[FXL_API_TOKEN_LABEL_MAX + 1];
    char created_at[FXL_TIME_LEN];
    char created_by[65];
    char revoked_at[FXL_TIME_LEN];   /* "" while valid */
    char revoked_by[65];
} fxl_api_token;

/* Admin only: issues a token acting as `login` (an active user), labelled
 * 1..64 printable characters (what system uses it). token_out receives the
 * token (FXL_API_TOKEN_HEX_LEN + 1 bytes), to be shown once; *out_id may be
 * NULL. One transaction with an audit row (never the token). */
int fxl_api_token_issue(fxl_ctx *ctx, int64_t *out_id, const char *login, const char *label,
                        char *token_out);

/* Admin only: revokes token `id`; FXL_ENOTFOUND if unknown, FXL_ECONFLICT
 * if already revoked. One transaction with an audit row. */
int fxl_api_token_revoke(fxl_ctx *ctx, int64_t id);

/* Admin only: every token, newest first. *out is a heap array (free()). */
int fxl_api_token_list(fxl_ctx *ctx, fxl_api_token **out, size_t *n);

/* Looks the token up by its SHA-256: when it is known, not revoked and its
 * user is active, sets that user as the acting user. Writes nothing. A
 * token that is not 64 hex digits, unknown, revoked or of an inactive user
 * is FXL_EPERM with one message for all ("api token not valid"). */
int fxl_api_token_check(fxl_ctx *ctx, const char *token);

#endif
