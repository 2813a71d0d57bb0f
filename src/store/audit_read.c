/* Reading the audit trail for people: filtered listings and single rows,
 * with the full name of the user each row names. Never writes. */
#include <stdio.h>
#include <string.h>

#include "fxl/audit.h"
#include "store/stmt.h"

#define AUDIT_COLS                                                                    \
    "a.id, a.at, a.user, coalesce(u.full_name, ''), a.action, a.entity, a.entity_id, " \
    "a.content, a.prev_hash, a.hash "

static int emit(fxl_stmt *s, fxl_audit_row_cb cb, void *arg)
{
    fxl_audit_row r;

    r.id = fxl_stmt_int(s, 0);
    r.at = fxl_stmt_text(s, 1);
    r.user = fxl_stmt_text(s, 2);
    r.user_name = fxl_stmt_text(s, 3);
    r.action = fxl_stmt_text(s, 4);
    r.entity = fxl_stmt_text(s, 5);
    r.entity_id = fxl_stmt_is_null(s, 6) ? 0 : fxl_stmt_int(s, 6);
    r.content = fxl_stmt_text(s, 7);
    r.prev_hash = fxl_stmt_text(s, 8);
    r.hash = fxl_stmt_text(s, 9);
    return cb(arg, &r);
}

int fxl_audit_list(fxl_ctx *ctx, const fxl_audit_filter *f, fxl_audit_row_cb cb, void *arg)
{
    fxl_audit_filter none = FXL_AUDIT_FILTER_INIT;
    fxl_stmt s = FXL_STMT_INIT;
    int rc;

    if (!f)
        f = &none;
    /* the last `limit` matches, printed in chain order */
    rc = fxl_stmt_prepare(&s, ctx,
        "SELECT * FROM (SELECT " AUDIT_COLS
        "  FROM audit_log a LEFT JOIN users u ON u.login = a.user "
        "  WHERE (:user IS NULL OR a.user = :user) AND (:action IS NULL OR a.action = :action) "
        "    AND (:entity IS NULL OR a.entity = :entity) "
        "    AND (:eid = 0 OR a.entity_id = :eid) "
        "    AND (:from IS NULL OR a.at >= :from) AND (:to IS NULL OR a.at < :to) "
        "  ORDER BY a.id DESC LIMIT :limit) ORDER BY 1");
    if (rc != 0)
        goto cleanup;
    fxl_stmt_bind_text(&s, ":user", f->user);
    fxl_stmt_bind_text(&s, ":action", f->action);
    fxl_stmt_bind_text(&s, ":entity", f->entity);
    fxl_stmt_bind_int(&s, ":eid", f->entity_id);
    fxl_stmt_bind_text(&s, ":from", f->from);
    fxl_stmt_bind_text(&s, ":to", f->to);
    fxl_stmt_bind_int(&s, ":limit", f->limit > 0 ? f->limit : -1);
    while ((rc = fxl_stmt_step(&s)) == 1)
        if ((rc = emit(&s, cb, arg)) != 0)
            goto cleanup;
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}

int fxl_audit_get(fxl_ctx *ctx, int64_t id, fxl_audit_row_cb cb, void *arg)
{
    fxl_stmt s = FXL_STMT_INIT;
    int rc, found = 0;

    rc = fxl_stmt_prepare(&s, ctx,
        "SELECT " AUDIT_COLS "FROM audit_log a LEFT JOIN users u ON u.login = a.user "
        "WHERE a.id = :id");
    if (rc != 0)
        goto cleanup;
    fxl_stmt_bind_int(&s, ":id", id);
    while ((rc = fxl_stmt_step(&s)) == 1) {
        found = 1;
        if ((rc = emit(&s, cb, arg)) != 0)
            goto cleanup;
    }
    if (rc == 0 && !found)
        rc = fxl_fail(ctx, FXL_ENOTFOUND, "audit row %lld not found", (long long)id);
cleanup:
    fxl_stmt_finalize(&s);
    return rc;
}
