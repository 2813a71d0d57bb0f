/* fxledger amend: supersede a mistyped reading with a corrected one. The old
 * row stays, marked superseded; its review item stays for the physicist. */
#include <limits.h>
#include <math.h>
#include <stdio.h>

#include "cli/cli.h"
#include "cli/record_view.h"
#include "fxl/record.h"

int cmd_amend(cli_env *env, int argc, char **argv)
{
    cli_opt opts[] = {
        {"reading", "X", "the corrected reading, > 0, in the detector's unit (required)", NULL},
        {"reason", "TEXT", "why the reading is amended, e.g. 'typed 2.04 for 20.4' (required)", NULL},
        {"temp", "C", "temperature at the detector, 10 to 45 degC (default: as in the original)", NULL},
        {"detector", "SERIAL", "the detector actually used (default: as in the original)", NULL},
        {"background", "X", "background reading subtracted, >= 0, detector unit (default: as in the original)", NULL},
        {NULL, NULL, NULL, NULL}};
    fxl_amend_request req;
    fxl_record_result res = FXL_RECORD_RESULT_INIT;
    const char *pos[1], *v;
    long id;
    int npos, rc;

    rc = cli_parse(env, "amend MEASUREMENT_ID --reading X --reason TEXT [--temp C] [--detector SERIAL] "
                   "[--background X]",
                   "Records a corrected reading that supersedes a mistyped one (therapist,\n"
                   "physicist or admin). The new measurement names the old one and the reason and\n"
                   "is judged exactly as at the original treatment time. Nothing is edited: the\n"
                   "old reading stays in the history and in reports, marked superseded, and its\n"
                   "review item, if any, stays in the queue for a physicist to close\n"
                   "(docs/review.md). Exit codes as for 'record'.",
                   opts, argc, argv, pos, 1, &npos);
    if (rc != 0)
        return rc > 0 ? CLI_EXIT_OK : CLI_EXIT_USAGE;
    if (npos != 1) {
        cli_error("amend needs the id of the measurement to supersede (see 'fxledger history')");
        return CLI_EXIT_USAGE;
    }
    fxl_amend_request_init(&req);
    if (cli_int(&id, pos[0][0] == '#' ? pos[0] + 1 : pos[0], "measurement id", 1, LONG_MAX) != 0)
        return CLI_EXIT_USAGE;
    req.measurement_id = id;
    if (!cli_get(opts, "reading")) {
        cli_error("--reading is required (the corrected reading, > 0)");
        return CLI_EXIT_USAGE;
    }
    if (cli_double(&req.reading, cli_get(opts, "reading"), "reading", 1e-9, 1e9, "(detector unit)") != 0)
        return CLI_EXIT_DATA;
    req.reason = cli_get(opts, "reason");
    if (!req.reason) {
        cli_error("--reason is required: say why the reading is amended (1 to %d characters)",
                  FXL_AMEND_REASON_MAX);
        return CLI_EXIT_USAGE;
    }
    if ((v = cli_get(opts, "temp")) &&
        cli_double(&req.temp_c, v, "temperature", FXL_RECORD_TEMP_MIN_C, FXL_RECORD_TEMP_MAX_C, "degC") != 0)
        return CLI_EXIT_DATA;
    if ((v = cli_get(opts, "background")) &&
        cli_double(&req.background, v, "background", 0, 1e9, "(detector unit)") != 0)
        return CLI_EXIT_DATA;
    req.detector = cli_get(opts, "detector");

    if ((rc = fxl_record_amend(env->ctx, &res, &req)) != 0) {
        fxl_record_result_release(&res);
        return cli_fail(env, rc);
    }
    if (!env->json)
        printf("measurement #%lld supersedes #%lld (reason: %s)\n\n",
               res.n ? (long long)res.items[0].measurement_id : 0LL, (long long)req.measurement_id,
               req.reason);
    rc = cli_record_finish(env, &res);
    fxl_record_result_release(&res);
    return rc;
}
