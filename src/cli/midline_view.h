/* Showing the midline estimates of entrance-exit pairs (fxl/record_midline.h)
 * under a verdict table or a history listing, and as JSON. */
#ifndef FXL_CLI_MIDLINE_VIEW_H
#define FXL_CLI_MIDLINE_VIEW_H

#include <stddef.h>

#include "cli/cli.h"
#include "fxl/record_midline.h"

/* One JSON object per pair, in an array. */
cJSON *cli_midline_json(const fxl_midline_pair *pairs, size_t n);

/* A heading naming the method, then one line per pair with both corrected
 * doses; nothing when n is 0. with_fraction adds the plan and fraction. */
void cli_midline_print(const fxl_midline_pair *pairs, size_t n, int with_fraction);

#endif
