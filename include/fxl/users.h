/* Users, roles and department set-up. Users are never deleted: a user who
 * leaves is deactivated and keeps every record signed with their login. */
#ifndef FXL_USERS_H
#define FXL_USERS_H

#include <stddef.h>
#include <stdint.h>

#include "fxl/fxl.h"

/* Fills a freshly created database: settings 'department', 'timezone'
 * (default "UTC") and the defaults of docs/settings.md, plus the first user
 * with the admin role, who becomes the acting user. One transaction. */
int fxl_init_department(fxl_ctx *ctx, const char *department, const char *timezone,
                        const char *admin_login, const char *admin_full_name);

/* One row of `users`. */
typedef struct fxl_user {
    int64_t id;
    char login[65];
    char full_name[201];
    fxl_role role;
    int active;                      /* 0 once deactivated */
    char created_at[FXL_TIME_LEN];
} fxl_user;

/* Adds a user (admin only). login: 1 to 64 characters of letters, digits,
 * '.', '_' or '-'; full_name: 1 to 200 characters. A taken login is
 * FXL_ECONFLICT. On success *out_id (may be NULL) holds users.id. One
 * transaction with its audit row. */
int fxl_user_add(fxl_ctx *ctx, int64_t *out_id, const char *login, const char *full_name,
                 fxl_role role);

/* Every user, active or not, ordered by login. *out is a heap array owned by
 * the caller (free() it); *n its length. Any role may read. */
int fxl_user_list(fxl_ctx *ctx, fxl_user **out, size_t *n);

/* Deactivates a user (admin only): they can no longer act, their records
 * stay. Refused for the acting user, for an already inactive user
 * (FXL_ECONFLICT) and for the last active admin. */
int fxl_user_deactivate(fxl_ctx *ctx, const char *login);

#endif
