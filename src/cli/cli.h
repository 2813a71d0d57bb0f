/* Shared plumbing of the fxledger program: the per-run environment, option
 * parsing, output helpers and the command entry points. No SQL, no physics. */
#ifndef FXL_CLI_H
#define FXL_CLI_H

#include <cjson/cJSON.h>
#include <stdio.h>

#include "fxl/fxl.h"

/* Exit codes (docs/cli.md). */
enum {
    CLI_EXIT_OK = 0,
    CLI_EXIT_USAGE = 1,        /* bad command line */
    CLI_EXIT_DATA = 2,         /* invalid input, not found, duplicate */
    CLI_EXIT_DB = 3,           /* database busy, not ours, newer, I/O */
    CLI_EXIT_PERM = 4,         /* not logged in, wrong password, or the role may not do this */
    /* record only, the worst result of the fraction: */
    CLI_EXIT_NOT_EVALUABLE = 10,  /* some result not evaluable or implausible */
    CLI_EXIT_TOLERANCE = 11,      /* some result outside tolerance */
    CLI_EXIT_ACTION = 12          /* some result outside the action level */
};

/* Command flags, handled once in main.c. */
#define CLI_NEEDS_DB 1      /* open an existing database (read-write) */
#define CLI_READONLY 2      /* ... read-only */
#define CLI_NEEDS_USER 4    /* authenticate (session or password) before the handler runs */

typedef struct cli_env {
    fxl_ctx *ctx;          /* open database, or NULL for commands without one */
    const char *db_path;
    const char *user;      /* --user: the login to authenticate as, or NULL */
    int password_fd;       /* --password-fd N, or -1: passwords come from the terminal */
    char token[65];        /* the live session's token, "" when none */
    char *password;        /* entered for this command (sodium_malloc), or NULL */
    int password_used;     /* ... and already spent on a signature */
    int json;              /* --json: machine-readable output */
    int color;             /* stdout is a terminal and NO_COLOR is unset */
    int interactive;       /* stdin is a terminal */
    const char *command;   /* e.g. "detector" */
    char saved[400];       /* what the command committed, named for the message when its
                            * output then cannot be written ("" when nothing said) */
} cli_env;

/* ---- options ---------------------------------------------------------- */

typedef struct cli_opt {
    const char *name;      /* long name without dashes, e.g. "patient" */
    const char *arg;       /* value placeholder ("ID"), NULL for a flag */
    const char *help;
    const char *value;     /* filled by cli_parse: the value, "1" for a flag */
} cli_opt;

/* A sub-command of a command family ("detector add"). */
typedef struct cli_sub {
    const char *name;
    int (*run)(cli_env *env, int argc, char **argv);
    const char *summary;
} cli_sub;

/* Parses argv[1..] (argv[0] is the (sub)command name) against opts (ended by
 * a {NULL} entry). Positional arguments go to pos[] (at most max_pos). On
 * --help prints usage from `synopsis`, `about` and opts and returns 1; on an
 * unknown option or a missing value prints a one-line error and returns -1;
 * else 0. */
int cli_parse(cli_env *env, const char *synopsis, const char *about, cli_opt *opts,
              int argc, char **argv, const char **pos, int max_pos, int *npos);

/* Value of an option after cli_parse, or NULL. */
const char *cli_get(const cli_opt *opts, const char *name);

/* Number parsing with a one-line error naming the field and range on
 * failure (printed; returns -1). */
int cli_double(double *out, const char *text, const char *field, double lo, double hi,
               const char *unit);
int cli_int(long *out, const char *text, const char *field, long lo, long hi);

/* Runs a sub-command of a family: argv[0] is the family, argv[1] the
 * sub-command. Prints the family's help for --help or no sub-command. */
int cli_dispatch_sub(cli_env *env, const cli_sub *subs, const char *about, int argc, char **argv);

/* ---- output ----------------------------------------------------------- */

/* "fxledger: error: <msg>" on stderr. */
void cli_error(const char *fmt, ...) __attribute__((format(printf, 1, 2)));
/* Prints fxl_errmsg and maps a library code to an exit code. */
int cli_fail(cli_env *env, int code);
int cli_exit_code(int fxl_code);

/* Prints a JSON value to stdout (formatted) and frees it. */
int cli_print_json(cJSON *value);

/* The lines 'verify' and 'restore' print when every check holds. */
struct fxl_whole_verify;
void cli_print_verified(const struct fxl_whole_verify *v);

/* The caution shown under every verdict table and report. */
void cli_print_caveat(FILE *out);

/* ANSI colour wrappers; return "" when colour is off. */
const char *cli_color(const cli_env *env, const char *code);
#define CLI_BOLD "1"
#define CLI_RED "31"
#define CLI_YELLOW "33"
#define CLI_GREEN "32"
#define CLI_RESET "0"

/* ---- command entry points (one source file per family) ---------------- */

/* A stored UTC time shown in the department's time zone (setting
 * 'timezone'): cli_local_time gives '2026-11-02 10:00 +01:00', cli_local_date
 * its local date 'YYYY-MM-DD'. Malformed text is copied. util.c. */
void cli_local_time(const cli_env *env, char *buf, size_t size, const char *stored);
void cli_local_date(const cli_env *env, char out[16], const char *stored);

int cmd_init(cli_env *env, int argc, char **argv);
int cmd_user(cli_env *env, int argc, char **argv);
int cmd_setting(cli_env *env, int argc, char **argv);
int cmd_machine(cli_env *env, int argc, char **argv);
int cmd_detector(cli_env *env, int argc, char **argv);
int cmd_calib(cli_env *env, int argc, char **argv);
int cmd_table(cli_env *env, int argc, char **argv);
int cmd_patient(cli_env *env, int argc, char **argv);
int cmd_plan(cli_env *env, int argc, char **argv);
int cmd_levels(cli_env *env, int argc, char **argv);
int cmd_record(cli_env *env, int argc, char **argv);
int cmd_history(cli_env *env, int argc, char **argv);
int cmd_verify(cli_env *env, int argc, char **argv);
int cmd_queue(cli_env *env, int argc, char **argv);
int cmd_amend(cli_env *env, int argc, char **argv);
int cmd_backup(cli_env *env, int argc, char **argv);
int cmd_restore(cli_env *env, int argc, char **argv);
int cmd_report(cli_env *env, int argc, char **argv);
int cmd_login(cli_env *env, int argc, char **argv);
int cmd_logout(cli_env *env, int argc, char **argv);
int cmd_today(cli_env *env, int argc, char **argv);
int cmd_stats(cli_env *env, int argc, char **argv);
int cmd_export(cli_env *env, int argc, char **argv);
int cmd_audit(cli_env *env, int argc, char **argv);
int cmd_serve(cli_env *env, int argc, char **argv);

#endif
