/* One-row id lookups by a text key (see lookup.h). */
#include "store/lookup.h"
#include "store/stmt.h"

int fxl_lookup_id(fxl_ctx *ctx, int64_t *out_id, const char *sql, const char *param, const char *value)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc = fxl_stmt_prepare_cached(&s, ctx, sql);

    if (rc == 0) {
        fxl_stmt_bind_text(&s, param, value);
        rc = fxl_stmt_step(&s);
        if (rc == 1)
            *out_id = fxl_stmt_int(&s, 0);
    }
    fxl_stmt_finalize(&s);
    return rc;
}
