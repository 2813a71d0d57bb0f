/* The web console's static files (assets/), embedded at build time by
 * cmake/embed_assets.cmake: served under /assets/<name>. */
#ifndef FXL_WEB_ASSETS_H
#define FXL_WEB_ASSETS_H

#include <stddef.h>

struct web_asset {
    const char *name;          /* file name, e.g. "console.css" */
    const char *type;          /* Content-Type */
    const unsigned char *data;
    size_t len;
};

extern const struct web_asset web_assets[];
extern const int web_asset_count;

#endif
