/* fxledger record: log one fraction's readings from options, from a readings
 * file, or interactively field by field; then the verdict table, guidance
 * and the alert hook. Syntax and decisions: docs/record.md. */
#include <errno.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli/cli.h"
#include "cli/record_flow.h"
#include "fxl/number.h"
#include "cli/record_view.h"
#include "cli/worklist_view.h"
#include "fxl/fraction.h"
#include "fxl/readings_json.h"
#include "fxl/record.h"

#define SYNOPSIS                                                                              \
    "record --patient MRN [--plan LABEL] [--fraction N] [--at TIME]\n"                        \
    "                       --field NAME[:entrance|exit] --detector SERIAL --reading X\n"     \
    "                       [--temp C] [--background X] [--field ... ]...\n"                 \
    "   or: fxledger record --file READINGS.json [--patient MRN ...]\n"                       \
    "   or: fxledger record [--patient MRN] [--interactive]"

#define ABOUT                                                                                 \
    "Logs one fraction of a patient's plan: turns each reading into a corrected dose,\n"      \
    "compares it with the field's expected dose and gives the verdict and what to do.\n"      \
    "Each '--field' starts a reading; the --detector, --reading, --temp and --background\n"   \
    "after it belong to that field. Given before the first --field, --detector, --temp\n"     \
    "and --background are defaults for every field. --temp is the temperature at the\n"       \
    "detector (default: setting skin_temp_c). --at is the treatment time: local time in\n"    \
    "the department's zone (YYYY-MM-DD[THH:MM[:SS]] or HH:MM today) or ISO 8601 with an\n"    \
    "offset (2026-11-02T10:00+01:00); default now. The plan defaults to the patient's\n"      \
    "latest plan that no other plan replaces, the fraction to the next number.\n"             \
    "--file reads the readings format of docs/format-readings.md ('-' = standard input).\n"   \
    "Interactive (--interactive, or no readings given on a terminal): without --patient\n"    \
    "today's worklist is shown and its line number chosen; the fields due are asked one\n"    \
    "by one with their detector filled in, each field is saved as soon as its reading is\n"   \
    "entered and its verdict shown at once; a due field left blank is named at the end.\n"    \
    "Exit: 0 all within tolerance, 10 not evaluable or implausible, 11 outside\n"             \
    "tolerance, 12 outside action level; 1 usage, 2 invalid input (nothing written)."

static cli_opt opts_template[] = {
    {"patient", "MRN", "patient (medical record number)", NULL},
    {"plan", "LABEL", "plan label (default: latest plan not replaced)", NULL},
    {"fraction", "N", "fraction number, 1 to the plan's fractions (default: next)", NULL},
    {"at", "TIME", "treatment time, local or ISO 8601 with offset (default: now)", NULL},
    {"field", "NAME[:POINT]", "starts a reading of this field (point entrance or exit)", NULL},
    {"detector", "SERIAL", "detector of the reading", NULL},
    {"reading", "X", "electrometer reading, > 0, in the detector's unit", NULL},
    {"temp", "C", "temperature at the detector, 10 to 45 degC", NULL},
    {"background", "X", "background reading subtracted, >= 0, detector unit", NULL},
    {"file", "PATH", "read the readings from a readings file", NULL},
    {"interactive", NULL, "ask field by field", NULL},
    {NULL, NULL, NULL, NULL}};

/* One --field group as typed. */
typedef struct group {
    char name[65];
    char point[16];
    const char *detector, *reading, *temp, *background;
} group;

typedef struct record_args {
    const char *patient, *plan, *fraction, *at, *file;
    int interactive;
    const char *def_detector, *def_temp, *def_background;
    group groups[FXL_RECORD_READINGS_MAX];
    size_t n;
} record_args;

static int set_once(const char **slot, const char *value, const char *name, const char *whose)
{
    if (*slot) {
        if (whose)
            cli_error("option '--%s' is given more than once for field '%s'", name, whose);
        else
            cli_error("option '--%s' is given more than once", name);
        return -1;
    }
    *slot = value;
    return 0;
}

static int split_field(group *g, const char *text)
{
    const char *colon = strchr(text, ':');
    size_t len = colon ? (size_t)(colon - text) : strlen(text);

    if (len == 0 || len > 64) {
        cli_error("field name '%s' must be 1 to 64 characters (NAME or NAME:entrance or NAME:exit)", text);
        return -1;
    }
    memcpy(g->name, text, len);
    g->name[len] = '\0';
    if (colon) {
        if (strcmp(colon + 1, "entrance") != 0 && strcmp(colon + 1, "exit") != 0) {
            cli_error("measured point '%s' of field '%s' must be 'entrance' or 'exit'", colon + 1, g->name);
            return -1;
        }
        snprintf(g->point, sizeof g->point, "%s", colon + 1);
    }
    return 0;
}

/* The option loop: cli_parse holds one value per option, and a reading is a
 * group of options, so record parses its own argv (against the same table,
 * used for --help). Returns 0, 1 after --help, or an exit code < 0. */
static int parse_args(cli_env *env, record_args *a, int argc, char **argv)
{
    int i;

    memset(a, 0, sizeof *a);
    for (i = 1; i < argc; i++) {
        if (strcmp(argv[i], "--help") == 0 || strcmp(argv[i], "-h") == 0) {
            const char *pos[1];
            int npos;
            cli_parse(env, SYNOPSIS, ABOUT, opts_template, 2, (char *[]){argv[0], "--help"}, pos, 0, &npos);
            return 1;
        }
    }
    for (i = 1; i < argc; i++) {
        const char *arg = argv[i], *name, *eq, *value = NULL;
        const cli_opt *o, *found = NULL;
        group *g = a->n ? &a->groups[a->n - 1] : NULL;
        size_t len;

        if (arg[0] != '-' || arg[1] != '-') {
            cli_error("unexpected argument '%s' (see 'fxledger record --help')", arg);
            return -CLI_EXIT_USAGE;
        }
        name = arg + 2;
        eq = strchr(name, '=');
        len = eq ? (size_t)(eq - name) : strlen(name);
        for (o = opts_template; o->name; o++)
            if (strlen(o->name) == len && strncmp(o->name, name, len) == 0)
                found = o;
        if (!found) {
            cli_error("unknown option '--%.*s' (see 'fxledger record --help')", (int)len, name);
            return -CLI_EXIT_USAGE;
        }
        if (found->arg) {
            if (eq)
                value = eq + 1;
            else if (i + 1 < argc)
                value = argv[++i];
            else {
                cli_error("option '--%s' needs a value %s", found->name, found->arg);
                return -CLI_EXIT_USAGE;
            }
        } else if (eq) {
            cli_error("option '--%s' takes no value", found->name);
            return -CLI_EXIT_USAGE;
        }

#define ONCE(slot, whose) \
    if (set_once(&(slot), value, found->name, whose) != 0) return -CLI_EXIT_USAGE
        if (strcmp(found->name, "patient") == 0) {
            ONCE(a->patient, NULL);
        } else if (strcmp(found->name, "plan") == 0) {
            ONCE(a->plan, NULL);
        } else if (strcmp(found->name, "fraction") == 0) {
            ONCE(a->fraction, NULL);
        } else if (strcmp(found->name, "at") == 0) {
            ONCE(a->at, NULL);
        } else if (strcmp(found->name, "file") == 0) {
            ONCE(a->file, NULL);
        } else if (strcmp(found->name, "interactive") == 0) {
            a->interactive = 1;
        } else if (strcmp(found->name, "field") == 0) {
            if (a->n >= FXL_RECORD_READINGS_MAX) {
                cli_error("too many readings: at most %d per fraction", FXL_RECORD_READINGS_MAX);
                return -CLI_EXIT_USAGE;
            }
            g = &a->groups[a->n++];
            memset(g, 0, sizeof *g);
            if (split_field(g, value) != 0)
                return -CLI_EXIT_DATA;
        } else if (strcmp(found->name, "reading") == 0) {
            if (!g) {
                cli_error("'--reading %s' must follow the '--field NAME' it belongs to", value);
                return -CLI_EXIT_USAGE;
            }
            ONCE(g->reading, g->name);
        } else if (strcmp(found->name, "detector") == 0) {
            if (g) {
                ONCE(g->detector, g->name);
            } else {
                ONCE(a->def_detector, NULL);
            }
        } else if (strcmp(found->name, "temp") == 0) {
            if (g) {
                ONCE(g->temp, g->name);
            } else {
                ONCE(a->def_temp, NULL);
            }
        } else if (strcmp(found->name, "background") == 0) {
            if (g) {
                ONCE(g->background, g->name);
            } else {
                ONCE(a->def_background, NULL);
            }
        }
#undef ONCE
    }
    return 0;
}

/* A number typed by the user; the range is checked by the library, which
 * knows the detector's unit. */
static int parse_number(double *out, const char *text, const char *what, const char *field,
                        const char *range)
{
    char *end = NULL;
    double v;

    (void)end;
    if (fxl_number_parse(&v, text, 0) != FXL_NUM_OK) {
        cli_error("%s '%s' for field '%s' is not a number: must be %s", what, text, field, range);
        return -1;
    }
    *out = v;
    return 0;
}

static int build_entries(fxl_reading_entry *e, const record_args *a)
{
    size_t i;

    for (i = 0; i < a->n; i++) {
        const group *g = &a->groups[i];
        const char *det = g->detector ? g->detector : a->def_detector;
        const char *temp = g->temp ? g->temp : a->def_temp;
        const char *bg = g->background ? g->background : a->def_background;

        fxl_reading_entry_init(&e[i]);
        e[i].field = g->name;
        e[i].point = g->point[0] ? g->point : NULL;
        if (!det) {
            cli_error("field '%s' needs '--detector SERIAL'", g->name);
            return CLI_EXIT_USAGE;
        }
        if (!g->reading) {
            cli_error("field '%s' needs '--reading X' (> 0, in the detector's unit)", g->name);
            return CLI_EXIT_USAGE;
        }
        e[i].detector = det;
        if (parse_number(&e[i].reading, g->reading, "reading", g->name, "> 0 in the detector's unit") != 0 ||
            (temp && parse_number(&e[i].temp_c, temp, "temperature", g->name, "10 to 45 degC") != 0) ||
            (bg && parse_number(&e[i].background, bg, "background", g->name,
                                ">= 0 and below the reading") != 0))
            return CLI_EXIT_DATA;
    }
    return 0;
}

/* ---- the command ------------------------------------------------------------------- */

/* A value given both in the file and on the command line must agree. */
static int merge(const char **slot, const char *from_file, const char *name)
{
    if (from_file && *from_file) {
        if (*slot && strcmp(*slot, from_file) != 0) {
            cli_error("--%s '%s' differs from the readings file's '%s'", name, *slot, from_file);
            return -1;
        }
        *slot = from_file;
    }
    return 0;
}

int cmd_record(cli_env *env, int argc, char **argv)
{
    record_args *a = calloc(1, sizeof *a);
    fxl_reading_entry *entries = calloc(FXL_RECORD_READINGS_MAX, sizeof *entries);
    char (*detectors)[65] = calloc(FXL_RECORD_READINGS_MAX, sizeof *detectors);
    fxl_readings_file file = FXL_READINGS_FILE_INIT;
    fxl_record_result result = FXL_RECORD_RESULT_INIT;
    fxl_record_request req;
    char fraction_text[16], at_utc[FXL_TIME_LEN];
    fxl_worklist_item *before = NULL;
    size_t n_before = 0;
    long fraction = 0;
    int rc, code = CLI_EXIT_OK, use_prompt;

    memset(&req, 0, sizeof req);
    if (!a || !entries || !detectors) {
        cli_error("out of memory");
        code = CLI_EXIT_DB;
        goto cleanup;
    }
    rc = parse_args(env, a, argc, argv);
    if (rc != 0) {
        code = rc > 0 ? CLI_EXIT_OK : -rc;
        goto cleanup;
    }
    if (a->file && (a->n || a->interactive)) {
        cli_error("--file cannot be combined with --field readings or --interactive");
        code = CLI_EXIT_USAGE;
        goto cleanup;
    }
    if (a->interactive && a->n) {
        cli_error("--interactive asks for the readings: give no --field readings with it");
        code = CLI_EXIT_USAGE;
        goto cleanup;
    }
    if (a->file && (a->def_detector || a->def_temp || a->def_background)) {
        cli_error("--detector, --temp and --background belong to --field readings; a readings file "
                  "gives them per reading");
        code = CLI_EXIT_USAGE;
        goto cleanup;
    }
    use_prompt = a->interactive || (!a->file && a->n == 0 && env->interactive);
    if (!a->file && a->n == 0 && !use_prompt) {
        cli_error("no readings given: use --field NAME --detector SERIAL --reading X, --file or "
                  "--interactive (see 'fxledger record --help')");
        code = CLI_EXIT_USAGE;
        goto cleanup;
    }

    if (a->file) {
        if ((rc = fxl_readings_read(env->ctx, &file, a->file)) != 0) {
            cli_error("%s", fxl_errmsg(env->ctx));
            code = CLI_EXIT_DATA;
            goto cleanup;
        }
        if (file.fraction) {
            snprintf(fraction_text, sizeof fraction_text, "%d", file.fraction);
            if (merge(&a->fraction, fraction_text, "fraction") != 0) {
                code = CLI_EXIT_DATA;
                goto cleanup;
            }
        }
        if (merge(&a->patient, file.patient, "patient") != 0 || merge(&a->plan, file.plan, "plan") != 0) {
            code = CLI_EXIT_DATA;
            goto cleanup;
        }
    }
    if (a->fraction && cli_int(&fraction, a->fraction, "fraction number", 1, 100) != 0) {
        code = CLI_EXIT_DATA;
        goto cleanup;
    }
    if (a->at) {
        /* typed by a person: local time in the department's zone or an offset */
        char typed[FXL_TIME_LEN];
        if ((rc = fxl_time_parse_local(env->ctx, typed, a->at)) != 0) {
            cli_error("treatment %s", fxl_errmsg(env->ctx));
            code = cli_exit_code(rc);
            goto cleanup;
        }
        if (file.treated_at[0]) {
            char given[FXL_TIME_LEN];
            if (fxl_time_normalize(given, file.treated_at, 0) != 0 || strcmp(given, typed) != 0) {
                cli_error("--at '%s' differs from the readings file's '%s'", a->at, file.treated_at);
                code = CLI_EXIT_DATA;
                goto cleanup;
            }
        }
        snprintf(at_utc, sizeof at_utc, "%s", typed);
        a->at = at_utc;
    } else if (file.treated_at[0]) {
        a->at = file.treated_at;
    }
    if (use_prompt) {
        cli_flow_args fa;
        memset(&fa, 0, sizeof fa);
        fa.patient = a->patient;
        fa.plan = a->plan;
        fa.fraction = (int)fraction;
        fa.treated_at = a->at;
        fa.def_detector = a->def_detector;
        code = cli_record_flow(env, &fa);
        goto cleanup;
    }
    if (!a->patient) {
        cli_error("--patient MRN is required");
        code = CLI_EXIT_USAGE;
        goto cleanup;
    }

    req.mrn = a->patient;
    req.plan = a->plan;
    req.treated_at = a->at;
    if (a->file) {
        req.readings = file.entries;
        req.n_readings = file.n;
    } else {
        if ((code = build_entries(entries, a)) != 0)
            goto cleanup;
        req.readings = entries;
        req.n_readings = a->n;
    }
    req.fraction = (int)fraction;

    /* What was open before the readings were written is shown first, the
     * items as they stand after them beside the verdicts. */
    if (!env->json) {
        const char *dets[FXL_RECORD_READINGS_MAX];
        size_t i;
        for (i = 0; i < req.n_readings; i++)
            dets[i] = req.readings[i].detector;
        if (fxl_holds_for_patient(env->ctx, &before, &n_before, req.mrn, dets, req.n_readings) != 0)
            n_before = 0;
    }
    if ((rc = fxl_record_fraction(env->ctx, &result, &req)) != 0) {
        code = cli_fail(env, rc);
        goto cleanup;
    }
    if (n_before) {
        printf("Open before this fraction was logged:\n");
        cli_items_print(env, stdout, before, n_before, 2);
        printf("\n");
    }
    code = cli_record_finish(env, &result);
cleanup:
    free(before);
    fxl_record_result_release(&result);
    fxl_readings_file_release(&file);
    free(a);
    free(entries);
    free(detectors);
    return code;
}
