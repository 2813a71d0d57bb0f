/* The fxledger program: global options, the command table and the one place
 * where databases are opened, users resolved and the process exits. */
#include <pwd.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include <errno.h>
#include <fcntl.h>
#include <sodium.h>

#include "cli/cli.h"
#include "cli/session.h"
#include "fxl/text.h"

typedef struct cli_command {
    const char *name;
    int (*run)(cli_env *env, int argc, char **argv);
    const char *summary;
    int flags;
} cli_command;

static const cli_command commands[] = {
    {"init", cmd_init, "create a new fxledger database and its first admin user", 0},
    {"login", cmd_login, "open a session (password prompt); it ends after 15 min idle or 12 h", CLI_NEEDS_DB},
    {"logout", cmd_logout, "end the session", CLI_NEEDS_DB},
    {"user", cmd_user, "add, list, deactivate users; passwords, resets and unlocks", CLI_NEEDS_DB | CLI_NEEDS_USER},
    {"setting", cmd_setting, "show and change department settings", CLI_NEEDS_DB | CLI_NEEDS_USER},
    {"machine", cmd_machine, "add and list treatment machines and their beams", CLI_NEEDS_DB | CLI_NEEDS_USER},
    {"detector", cmd_detector, "add, list, show and retire in vivo detectors", CLI_NEEDS_DB | CLI_NEEDS_USER},
    {"calib", cmd_calib, "record and list cross-calibrations against an ion chamber", CLI_NEEDS_DB | CLI_NEEDS_USER},
    {"table", cmd_table, "load and list correction-factor tables", CLI_NEEDS_DB | CLI_NEEDS_USER},
    {"patient", cmd_patient, "add, list and show patients", CLI_NEEDS_DB | CLI_NEEDS_USER},
    {"plan", cmd_plan, "import, list and show treatment plans and their fields", CLI_NEEDS_DB | CLI_NEEDS_USER},
    {"levels", cmd_levels, "set and list tolerance and action levels", CLI_NEEDS_DB | CLI_NEEDS_USER},
    {"today", cmd_today, "today's worklist: patients, fields due, detectors, holds", CLI_NEEDS_DB | CLI_NEEDS_USER},
    {"record", cmd_record, "log one fraction's readings and show the verdicts", CLI_NEEDS_DB | CLI_NEEDS_USER},
    {"history", cmd_history, "list logged measurements of a patient", CLI_NEEDS_DB | CLI_NEEDS_USER},
    {"queue", cmd_queue, "work the review queue: list, show, acknowledge, comment, close", CLI_NEEDS_DB | CLI_NEEDS_USER},
    {"amend", cmd_amend, "supersede a mistyped reading with a corrected one", CLI_NEEDS_DB | CLI_NEEDS_USER},
    {"report", cmd_report, "write per-patient and monthly PDF summaries", CLI_READONLY | CLI_NEEDS_USER},
    {"stats", cmd_stats, "statistics of a period's deviations by site, technique, energy, point, detector", CLI_READONLY | CLI_NEEDS_USER},
    {"export", cmd_export, "export the measurement record as CSV or JSON", CLI_READONLY | CLI_NEEDS_USER},
    {"audit", cmd_audit, "list and show rows of the audit trail", CLI_READONLY | CLI_NEEDS_USER},
    {"backup", cmd_backup, "copy the database online to a file", CLI_NEEDS_DB | CLI_NEEDS_USER},
    {"verify", cmd_verify, "check the audit chain and the database's integrity", CLI_NEEDS_DB | CLI_NEEDS_USER},
};

static void print_help(void)
{
    size_t i;

    printf("fxledger %s - fraction-by-fraction logbook for in vivo dosimetry\n\n", FXL_VERSION);
    printf("usage: fxledger [--db PATH] [--user NAME] [--password-fd N] [--json] <command> [options]\n\n");
    printf("commands:\n");
    for (i = 0; i < sizeof commands / sizeof commands[0]; i++)
        printf("  %-10s %s\n", commands[i].name, commands[i].summary);
    printf("\nglobal options:\n"
           "  --db PATH     database file (default $FXLEDGER_DB, else ./fxledger.db)\n"
           "  --user NAME   log in as NAME (default: the OS login name); a live session of\n"
           "                another user is then not used, the password is asked\n"
           "  --password-fd N  read passwords from file descriptor N, one per line, instead\n"
           "                of the terminal (scripts); never put a password on the command line\n"
           "  --json        machine-readable output for listings and results\n"
           "  --help        this help; 'fxledger <command> --help' for a command\n"
           "  --version     print the version\n"
           "\nexit codes: 0 ok, 1 usage, 2 data error, 3 database error, 4 permission denied;\n"
           "record: 10 not evaluable or implausible, 11 outside tolerance, 12 outside action level.\n");
    printf("\n");
    cli_print_caveat(stdout);
}

/* Removes the global options from argv wherever they stand (before "--"). */
static int take_global_options(cli_env *env, int *argc, char **argv, int *want_help, int *want_version)
{
    int i, j = 0, seen_db = 0, seen_user = 0, seen_json = 0;

    for (i = 0; i < *argc; i++) {
        const char *a = argv[i];
        if (strcmp(a, "--") == 0) {
            while (i < *argc)
                argv[j++] = argv[i++];
            break;
        }
        /* A global option given twice is refused like a repeated command
         * option: which of two users or databases was meant is a guess. */
        if (strcmp(a, "--db") == 0 || strncmp(a, "--db=", 5) == 0 || strcmp(a, "--user") == 0 ||
            strncmp(a, "--user=", 7) == 0 || strcmp(a, "--json") == 0) {
            int *seen = a[2] == 'd' ? &seen_db : a[2] == 'u' ? &seen_user : &seen_json;
            if ((strcmp(a, "--db") == 0 || strcmp(a, "--user") == 0) && i + 1 >= *argc) {
                cli_error("option '%s' needs a value", a);
                return -1;
            }
            if (*seen) {
                cli_error("option '%.*s' is given more than once", a[2] == 'd' ? 4 : a[2] == 'u' ? 6 : 6, a);
                return -1;
            }
            *seen = 1;
        }
        if (strcmp(a, "--password-fd") == 0 || strncmp(a, "--password-fd=", 14) == 0) {
            const char *v = a[13] == '=' ? a + 14 : (i + 1 < *argc ? argv[++i] : NULL);
            char *end = NULL;
            long fd;
            if (!v) {
                cli_error("option '--password-fd' needs a value N");
                return -1;
            }
            fd = strtol(v, &end, 10);
            if (end == v || *end || fd < 0 || fd > 1024 || fcntl((int)fd, F_GETFD) < 0) {
                cli_error("--password-fd '%s' is not an open file descriptor", v);
                return -1;
            }
            if (env->password_fd >= 0) {
                cli_error("option '--password-fd' is given more than once");
                return -1;
            }
            env->password_fd = (int)fd;
        } else if (strcmp(a, "--db") == 0 || strcmp(a, "--user") == 0) {
            if (i + 1 >= *argc) {
                cli_error("option '%s' needs a value", a);
                return -1;
            }
            if (a[2] == 'd')
                env->db_path = argv[++i];
            else
                env->user = argv[++i];
        } else if (strncmp(a, "--db=", 5) == 0) {
            env->db_path = a + 5;
        } else if (strncmp(a, "--user=", 7) == 0) {
            env->user = a + 7;
        } else if (strcmp(a, "--json") == 0) {
            env->json = 1;
        } else if (j == 0 && (strcmp(a, "--help") == 0 || strcmp(a, "-h") == 0)) {
            *want_help = 1;
        } else if (j == 0 && strcmp(a, "--version") == 0) {
            *want_version = 1;
        } else {
            argv[j++] = argv[i];
        }
    }
    *argc = j;
    return 0;
}

/* Every argument is text that may end up in the record, a report or on a
 * screen: it must be UTF-8 without control characters (docs/hazards.md). The
 * value itself is not echoed, so the error line stays clean. */
static int check_arguments(int argc, char **argv)
{
    int i;

    for (i = 0; i < argc; i++) {
        const char *a = argv[i], *prev = i > 0 ? argv[i - 1] : "";
        long at = fxl_utf8_invalid_at(a, strlen(a));
        const char *what = at >= 0 ? "is not valid UTF-8 text" : "contains a control character";
        char name[48];

        if (at < 0 && (at = fxl_text_control_at(a)) < 0)
            continue;
        if (strncmp(a, "--", 2) == 0 && strchr(a, '='))
            snprintf(name, sizeof name, "the value of '%.*s'", (int)(strchr(a, '=') - a), a);
        else if (strncmp(prev, "--", 2) == 0 && !strchr(prev, '=') && strlen(prev) < 32)
            snprintf(name, sizeof name, "the value of '%s'", prev);
        else
            snprintf(name, sizeof name, "argument %d", i + 1);
        cli_error("%s %s (at byte %ld): names, notes and file names must be printable UTF-8 "
                  "text", name, what, at + 1);
        return -1;
    }
    return 0;
}

/* A full disk or closed pipe must not pass silently - and what was saved
 * before the output failed must not be reported as lost, or it is logged
 * twice (docs/robustness.md). env NULL: nothing was saved. */
static int finish_with(const cli_env *env, int code, int changed)
{
    int err;

    errno = 0;
    if (fflush(stdout) == 0 && !ferror(stdout))
        return code;
    /* errno of the failed write is gone when stdio failed earlier (the
     * buffer filled mid-command); then the reason is not known. */
    err = errno;
    if (env && env->saved[0])
        cli_error("could not write the output (%s), but %s - it is in the record: do not enter it "
                  "again", err ? strerror(err) : "write error", env->saved);
    else if (env && changed)
        cli_error("could not write the output (%s), but the command completed and what it changed "
                  "is saved (see 'fxledger audit list'): do not repeat it", err ? strerror(err) : "write error");
    else
        cli_error("could not write the output (%s)", err ? strerror(err) : "write error");
    return code ? code : CLI_EXIT_DB;
}

static int finish(int code)
{
    return finish_with(NULL, code, 0);
}

int main(int argc, char **argv)
{
    cli_env env = {0};
    fxl_ctx *rw = NULL;
    const cli_command *cmd = NULL;
    const char *nocolor = getenv("NO_COLOR");
    int want_help = 0, want_version = 0, rc, flags;
    long long changes;
    size_t i;

    env.db_path = getenv("FXLEDGER_DB");
    if (!env.db_path || !*env.db_path)
        env.db_path = "fxledger.db";
    env.user = NULL;
    env.password_fd = -1;
    env.color = isatty(STDOUT_FILENO) && !(nocolor && *nocolor);
    env.interactive = isatty(STDIN_FILENO);

    if (sodium_init() < 0) {
        fprintf(stderr, "fxledger: error: cannot initialise libsodium\n");
        return CLI_EXIT_DB;
    }
    argc--;
    argv++;
    if (check_arguments(argc, argv) != 0)
        return finish(CLI_EXIT_DATA);
    if (take_global_options(&env, &argc, argv, &want_help, &want_version) != 0)
        return finish(CLI_EXIT_USAGE);
    if (want_version) {
        printf("fxledger %s\n", FXL_VERSION);
        return finish(0);
    }
    if (want_help || argc == 0) {
        print_help();
        return finish(argc == 0 && !want_help ? CLI_EXIT_USAGE : 0);
    }
    for (i = 0; i < sizeof commands / sizeof commands[0]; i++)
        if (strcmp(argv[0], commands[i].name) == 0)
            cmd = &commands[i];
    if (!cmd) {
        cli_error("unknown command '%s' (see 'fxledger --help')", argv[0]);
        return finish(CLI_EXIT_USAGE);
    }
    env.command = cmd->name;
    flags = cmd->flags;

    /* Help needs no database. */
    for (i = 1; i < (size_t)argc; i++)
        if (strcmp(argv[i], "--help") == 0 || strcmp(argv[i], "-h") == 0)
            flags = 0;

    if (flags & (CLI_NEEDS_DB | CLI_READONLY)) {
        rc = fxl_open(&env.ctx, env.db_path, (flags & CLI_READONLY) ? FXL_OPEN_READONLY : 0);
        if (rc != 0) {
            rc = cli_fail(&env, rc);
            fxl_close(env.ctx);
            return finish(rc);
        }
        /* A read-only command still needs a writable connection to count a
         * failed password or to record the session's activity. */
        if ((flags & CLI_NEEDS_USER) && (flags & CLI_READONLY) && fxl_open(&rw, env.db_path, 0) != 0) {
            fxl_close(rw);
            rw = NULL;
        }
        if ((flags & CLI_NEEDS_USER) && (rc = cli_authenticate(&env, rw ? rw : env.ctx)) != 0) {
            cli_auth_release(&env);
            fxl_close(rw);
            fxl_close(env.ctx);
            return finish(rc);
        }
    }
    changes = fxl_total_changes(env.ctx);
    rc = cmd->run(&env, argc, argv);
    changes = fxl_total_changes(env.ctx) - changes;
    fxl_sign_end(env.ctx);
    /* Activity keeps the session alive; a refused command does not count. */
    if (env.token[0] && (rc == CLI_EXIT_OK || rc >= CLI_EXIT_NOT_EVALUABLE) &&
        ((flags & CLI_READONLY) ? rw : env.ctx))
        fxl_session_touch((flags & CLI_READONLY) ? rw : env.ctx, env.token);
    cli_auth_release(&env);
    fxl_close(rw);
    fxl_close(env.ctx);
    return finish_with(&env, rc, changes > 0);
}
