/* Users, roles and department set-up. */
#ifndef FXL_USERS_H
#define FXL_USERS_H

#include "fxl/fxl.h"

/* Fills a freshly created database: settings 'department', 'timezone'
 * (default "UTC") and the defaults of docs/settings.md, plus the first user
 * with the admin role, who becomes the acting user. One transaction. */
int fxl_init_department(fxl_ctx *ctx, const char *department, const char *timezone,
                        const char *admin_login, const char *admin_full_name);

#endif
