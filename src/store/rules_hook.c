/* Rules over history after a fraction is logged. Placeholder until the
 * review-queue rules land: evaluates nothing. */
#include "store/rules_hook.h"

int fxl_rules_after_record(fxl_ctx *ctx, int64_t fraction_id)
{
    (void)ctx;
    (void)fraction_id;
    return 0;
}
