/* Account creation with a hook run inside the same transaction, so that
 * store/auth.c can add the password and signing key atomically. Private to
 * src/store. */
#ifndef FXL_STORE_USERS_INT_H
#define FXL_STORE_USERS_INT_H

#include <stdint.h>

#include "fxl/users.h"

/* Called inside the write transaction after the users row and its audit
 * row are written; a non-zero return rolls everything back. */
typedef int (*fxl_user_hook)(fxl_ctx *ctx, int64_t user_id, void *arg);

int fxl_init_department_hook(fxl_ctx *ctx, const char *department, const char *timezone,
                             const char *admin_login, const char *admin_full_name,
                             fxl_user_hook hook, void *arg);
int fxl_user_add_hook(fxl_ctx *ctx, int64_t *out_id, const char *login, const char *full_name,
                      fxl_role role, fxl_user_hook hook, void *arg);

#endif
