/* Option parsing, number parsing, sub-command dispatch and output helpers
 * shared by every command. */
#include <errno.h>
#include <math.h>
#include <stdarg.h>
#include <stdlib.h>
#include <string.h>

#include "cli/cli.h"
#include "cli/manpage.h"
#include "fxl/number.h"
#include "fxl/fraction.h"
#include "fxl/text.h"

/* One readable line: text echoed from the input (a name, a file's content)
 * may hold control sequences, invalid UTF-8 or 100 kB; none of that reaches
 * the terminal (docs/hazards.md). */
void cli_error(const char *fmt, ...)
{
    char msg[4096], shown[1000];
    va_list ap;

    va_start(ap, fmt);
    vsnprintf(msg, sizeof msg, fmt, ap);
    va_end(ap);
    fxl_text_printable(shown, sizeof shown, msg);
    fprintf(stderr, "fxledger: error: %s\n", shown);
}

int cli_exit_code(int fxl_code)
{
    switch (fxl_code) {
    case FXL_OK: return CLI_EXIT_OK;
    case FXL_ENOTFOUND:
    case FXL_EINVAL:
    case FXL_ECONFLICT:
    case FXL_ERANGE: return CLI_EXIT_DATA;
    case FXL_EPERM:
    case FXL_EAUTH:
    case FXL_EEXPIRED: return CLI_EXIT_PERM;
    default: return CLI_EXIT_DB;
    }
}

int cli_fail(cli_env *env, int code)
{
    cli_error("%s", fxl_errmsg(env->ctx));
    return cli_exit_code(code);
}

static void print_usage(const char *synopsis, const char *about, const cli_opt *opts)
{
    const cli_opt *o;

    if (cli_man_mode) {
        cli_man_usage(synopsis, about, opts);
        return;
    }
    printf("usage: fxledger %s\n", synopsis);
    if (about)
        printf("\n%s\n", about);
    if (opts && opts[0].name) {
        printf("\noptions:\n");
        for (o = opts; o->name; o++) {
            char left[48];
            snprintf(left, sizeof left, "--%s%s%s", o->name, o->arg ? " " : "", o->arg ? o->arg : "");
            printf("  %-24s %s\n", left, o->help);
        }
    }
    printf("  %-24s %s\n", "--json", "machine-readable output (global)");
    printf("  %-24s %s\n", "--help", "this help");
}

int cli_parse(cli_env *env, const char *synopsis, const char *about, cli_opt *opts,
              int argc, char **argv, const char **pos, int max_pos, int *npos)
{
    int i, only_pos = 0;
    cli_opt *o;

    (void)env;
    *npos = 0;
    for (o = opts; o && o->name; o++)
        o->value = NULL;
    for (i = 1; i < argc; i++) {
        const char *a = argv[i];
        if (!only_pos && strcmp(a, "--") == 0) {
            only_pos = 1;
            continue;
        }
        if (!only_pos && (strcmp(a, "--help") == 0 || strcmp(a, "-h") == 0)) {
            print_usage(synopsis, about, opts);
            return 1;
        }
        if (!only_pos && a[0] == '-' && a[1] == '-') {
            const char *name = a + 2, *eq = strchr(name, '=');
            size_t len = eq ? (size_t)(eq - name) : strlen(name);
            cli_opt *found = NULL;
            for (o = opts; o && o->name; o++)
                if (strlen(o->name) == len && strncmp(o->name, name, len) == 0)
                    found = o;
            if (!found) {
                cli_error("unknown option '--%.*s' (see 'fxledger %s --help')", (int)len, name,
                          env->command ? env->command : "");
                return -1;
            }
            /* "--family X --family Y" would silently keep Y: refused, as a
             * repeated global option is (docs/security.md). */
            if (found->value) {
                cli_error("option '--%s' is given more than once", found->name);
                return -1;
            }
            if (found->arg) {
                if (eq) {
                    found->value = eq + 1;
                } else if (i + 1 < argc) {
                    found->value = argv[++i];
                } else {
                    cli_error("option '--%s' needs a value %s", found->name, found->arg);
                    return -1;
                }
            } else {
                if (eq) {
                    cli_error("option '--%s' takes no value", found->name);
                    return -1;
                }
                found->value = "1";
            }
            continue;
        }
        if (*npos >= max_pos) {
            cli_error("unexpected argument '%s' (see 'fxledger %s --help')", a,
                      env->command ? env->command : "");
            return -1;
        }
        pos[(*npos)++] = a;
    }
    return 0;
}

const char *cli_get(const cli_opt *opts, const char *name)
{
    const cli_opt *o;

    for (o = opts; o->name; o++)
        if (strcmp(o->name, name) == 0)
            return o->value;
    return NULL;
}

int cli_double(double *out, const char *text, const char *field, double lo, double hi,
               const char *unit)
{
    char msg[256];
    int rc = fxl_number_in_range(out, text, 0, lo, hi);

    if (rc != FXL_NUM_OK) {
        fxl_number_message(msg, sizeof msg, rc, field, text, lo, hi, unit);
        cli_error("%s", msg);
        return -1;
    }
    return 0;
}

int cli_int(long *out, const char *text, const char *field, long lo, long hi)
{
    char msg[256];
    double v = 0;
    int rc = fxl_number_in_range(&v, text, FXL_NUM_WHOLE, (double)lo, (double)hi);

    if (rc != FXL_NUM_OK) {
        fxl_number_message(msg, sizeof msg, rc, field, text, (double)lo, (double)hi, "");
        if (rc == FXL_NUM_SYNTAX)
            snprintf(msg, sizeof msg, "%s '%.60s' is not a whole number (%ld to %ld)", field, text, lo, hi);
        cli_error("%s", msg);
        return -1;
    }
    *out = (long)v;
    return 0;
}

int cli_dispatch_sub(cli_env *env, const cli_sub *subs, const char *about, int argc, char **argv)
{
    const cli_sub *s;

    if (cli_man_mode && argc >= 2 && strcmp(argv[1], "--help") == 0)
        return cli_man_family(env, subs, about, argv[0]);
    if (argc < 2 || strcmp(argv[1], "--help") == 0 || strcmp(argv[1], "-h") == 0) {
        printf("usage: fxledger %s <sub-command> [options]\n\n%s\n\nsub-commands:\n", argv[0], about);
        for (s = subs; s->name; s++)
            printf("  %-10s %s\n", s->name, s->summary);
        printf("\n'fxledger %s <sub-command> --help' describes each.\n", argv[0]);
        return argc < 2 ? CLI_EXIT_USAGE : CLI_EXIT_OK;
    }
    for (s = subs; s->name; s++)
        if (strcmp(argv[1], s->name) == 0)
            return s->run(env, argc - 1, argv + 1);
    cli_error("unknown sub-command '%s %s' (see 'fxledger %s --help')", argv[0], argv[1], argv[0]);
    return CLI_EXIT_USAGE;
}

int cli_print_json(cJSON *value)
{
    char *text = cJSON_Print(value);

    cJSON_Delete(value);
    if (!text) {
        cli_error("out of memory printing JSON");
        return CLI_EXIT_DB;
    }
    puts(text);
    free(text);
    return CLI_EXIT_OK;
}

void cli_print_caveat(FILE *out)
{
    fputs("Caution: these results support, and do not replace, the judgement of a qualified\n"
          "medical physicist. Tolerance and action levels are local settings; follow your\n"
          "department's procedures and local regulations.\n",
          out);
}

const char *cli_color(const cli_env *env, const char *code)
{
    static char buf[4][12];
    static int next;
    char *b;

    if (!env->color || env->json)
        return "";
    b = buf[next++ % 4];
    snprintf(b, sizeof buf[0], "\033[%sm", code);
    return b;
}

void cli_local_time(const cli_env *env, char *buf, size_t size, const char *stored)
{
    if (!stored || !*stored) {
        snprintf(buf, size, "%s", "");
        return;
    }
    fxl_time_show_local(env->ctx, buf, size, stored);
}

void cli_local_date(const cli_env *env, char out[16], const char *stored)
{
    char full[48];

    cli_local_time(env, full, sizeof full, stored);
    snprintf(out, 16, "%.10s", full);
}
