/* The signatures of a row for --json output and for text listings. */
#ifndef FXL_CLI_SIGNATURE_VIEW_H
#define FXL_CLI_SIGNATURE_VIEW_H

#include <stdint.h>

#include "cli/cli.h"
#include "fxl/auth.h"

/* [{signer, printed_name, signed_at, meaning}, ...] (empty when none). */
cJSON *signatures_json(cli_env *env, const char *entity, int64_t id);
/* One line per signature: "<indent>signed by NAME (login) at T: MEANING". */
void print_signatures(cli_env *env, const char *entity, int64_t id, const char *indent);

#endif
