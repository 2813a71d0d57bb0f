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
#include "cli/manpage.h"
#include "cli/session.h"
#include "fxl/number.h"
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
    {"serve", cmd_serve, "run the department's web console on the database (docs/console.md)", 0},
    {"verify", cmd_verify, "check the audit chain and the database's integrity", CLI_NEEDS_DB | CLI_NEEDS_USER},
    {"restore", cmd_restore, "restore drill: copy a backup into a new file, verify it, say what it holds", 0},
};

/* The global options, for --help and fxledger(1). */
static const cli_opt global_opts[] = {
    {"db", "PATH", "database file (default $FXLEDGER_DB, else ./fxledger.db)", NULL},
    {"user", "NAME", "log in as NAME (default: the OS login name); a live session of\n"
                     "another user is then not used, the password is asked", NULL},
    {"password-fd", "N", "read passwords from file descriptor N, one per line, instead\n"
                         "of the terminal (scripts); never put a password on the command line", NULL},
    {"json", NULL, "machine-readable output for listings and results", NULL},
    {"help", NULL, "this help; 'fxledger <command> --help' for a command", NULL},
    {"version", NULL, "print the version", NULL},
    {NULL, NULL, NULL, NULL}};

#define USAGE_LINE "fxledger [--db PATH] [--user NAME] [--password-fd N] [--json] <command> [options]"
#define EXIT_CODES "exit codes: 0 ok, 1 usage, 2 data error, 3 database error, 4 permission denied;\n" \
                   "record: 10 not evaluable or implausible, 11 outside tolerance, 12 outside action level.\n"

static void print_help(void)
{
    const cli_opt *o;
    size_t i;

    printf("fxledger %s - fraction-by-fraction logbook for in vivo dosimetry\n\n", FXL_VERSION);
    printf("usage: %s\n\n", USAGE_LINE);
    printf("commands:\n");
    for (i = 0; i < sizeof commands / sizeof commands[0]; i++)
        printf("  %-10s %s\n", commands[i].name, commands[i].summary);
    printf("\nglobal options:\n");
    for (o = global_opts; o->name; o++) {
        char left[40];
        const char *h = o->help;
        snprintf(left, sizeof left, "--%s%s%s", o->name, o->arg ? " " : "", o->arg ? o->arg : "");
        printf("  %-16s ", left);
        for (; *h; h++) {
            putchar(*h);
            if (*h == '\n')
                printf("  %-16s ", "");
        }
        putchar('\n');
    }
    printf("\n" EXIT_CODES);
    printf("\n");
    cli_print_caveat(stdout);
}

/* ---- manual pages (cli/manpage.h) ------------------------------------------ */

static void man_header(FILE *out, const char *page, const char *date)
{
    fprintf(out, ".\\\" Generated by 'fxledger --man-pages' from the option tables of --help.\n"
                 ".\\\" Do not edit: change the tables in src/cli instead.\n");
    fprintf(out, ".TH \"");
    cli_man_word(out, page);
    fprintf(out, "\" 1 \"%s\" \"fxledger %s\" \"fxledger manual\"\n", date, FXL_VERSION);
}

static void man_footer(FILE *out, const char *command)
{
    fprintf(out, ".SH \"EXIT STATUS\"\n");
    cli_man_text(out, EXIT_CODES);
    fprintf(out, ".SH CAUTION\n");
    {
        char *buf = NULL;
        size_t n = 0;
        FILE *mem = open_memstream(&buf, &n);
        if (mem) {
            cli_print_caveat(mem);
            fclose(mem);
            cli_man_text(out, buf);
            free(buf);
        }
    }
    fprintf(out, ".SH \"SEE ALSO\"\n");
    if (command)
        fprintf(out, ".BR fxledger (1),\n");
    fprintf(out, "the documentation in\n.IR /usr/share/doc/fxledger/docs/ ,\n"
                 "in particular\n.I deployment.md\nand\n.IR security.md .\n");
}

/* Writes DIR/fxledger.1 and DIR/fxledger-COMMAND.1 for every command; each
 * command's part is its own --help, printed as roff (cli_man_mode). */
static int write_man_pages(cli_env *env, const char *dir, const char *date)
{
    char path[4096];
    const cli_opt *o;
    size_t i;
    FILE *out;
    int rc = 0;

    snprintf(path, sizeof path, "%s/fxledger.1", dir);
    if (!(out = fopen(path, "w"))) {
        cli_error("cannot write '%s'", path);
        return CLI_EXIT_DB;
    }
    man_header(out, "fxledger", date);
    fprintf(out, ".SH NAME\nfxledger \\- fraction\\-by\\-fraction logbook for in vivo dosimetry\n"
                 ".SH SYNOPSIS\n");
    cli_man_text(out, USAGE_LINE);
    fprintf(out, ".SH DESCRIPTION\n"
                 "fxledger keeps the record of in vivo dosimetry measurements of a radiotherapy\n"
                 "department: detectors, calibrations, plans, readings, verdicts against the\n"
                 "tolerance and action levels, the review queue and a hash\\-chained audit trail,\n"
                 "in one SQLite database file.\n"
                 "Each command is described in its own page, listed below.\n"
                 ".SH COMMANDS\n");
    for (i = 0; i < sizeof commands / sizeof commands[0]; i++) {
        fprintf(out, ".TP\n.B ");
        cli_man_word(out, commands[i].name);
        fprintf(out, "\n");
        cli_man_text(out, commands[i].summary);
        fprintf(out, "(see\n.BR fxledger\\-");
        cli_man_word(out, commands[i].name);
        fprintf(out, " (1))\n");
    }
    fprintf(out, ".SH \"GLOBAL OPTIONS\"\n");
    for (o = global_opts; o->name; o++) {
        fprintf(out, ".TP\n.%s \"\\-\\-", o->arg ? "BI" : "B");
        cli_man_word(out, o->name);
        if (o->arg) {
            fprintf(out, " \" \"");
            cli_man_word(out, o->arg);
        }
        fprintf(out, "\"\n");
        cli_man_text(out, o->help);
    }
    fprintf(out, ".SH ENVIRONMENT\n.TP\n.B FXLEDGER_DB\n"
                 "the database file when\n.B \\-\\-db\nis not given\n"
                 ".TP\n.B NO_COLOR\nwhen set and not empty, no colour in the output\n"
                 ".SH FILES\n.TP\n.I /var/lib/fxledger/fxledger.db\n"
                 "the database of a server installation (mode 0600, owned by the fxledger account)\n"
                 ".TP\n.I /usr/lib/systemd/system/fxledger.service\n"
                 "the web console as a service, not enabled at installation\n"
                 ".TP\n.I /usr/lib/systemd/system/fxledger\\-backup.timer\n"
                 "the daily backup with rotation, not enabled at installation; it logs in as an\n"
                 "auditor with the password in\n.I /etc/fxledger/backup.password\n"
                 ".TP\n.I /var/backups/fxledger/\n"
                 "where the scheduled backups go\n");
    man_footer(out, NULL);
    if (fclose(out) != 0)
        rc = CLI_EXIT_DB;

    cli_man_mode = 1;
    for (i = 0; i < sizeof commands / sizeof commands[0] && rc == 0; i++) {
        char *argv[] = {(char *)commands[i].name, "--help", NULL};
        snprintf(path, sizeof path, "%s/fxledger-%s.1", dir, commands[i].name);
        fflush(stdout);
        if (!freopen(path, "w", stdout)) {
            rc = CLI_EXIT_DB;
            break;
        }
        snprintf(path, sizeof path, "fxledger-%s", commands[i].name);
        man_header(stdout, path, date);
        printf(".SH NAME\n");
        cli_man_word(stdout, path);
        printf(" \\- ");
        cli_man_text(stdout, commands[i].summary);
        env->command = commands[i].name;
        if (commands[i].run(env, 2, argv) != CLI_EXIT_OK)
            rc = CLI_EXIT_USAGE;
        man_footer(stdout, commands[i].name);
        if (fflush(stdout) != 0 || ferror(stdout))
            rc = CLI_EXIT_DB;
    }
    cli_man_mode = 0;
    return rc;
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
            {
                double d = -1;
                (void)end;
                fd = fxl_number_in_range(&d, v, FXL_NUM_WHOLE, 0, 1024) == FXL_NUM_OK ? (long)d : -1;
            }
            if (fd < 0 || fcntl((int)fd, F_GETFD) < 0) {
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
    /* Hidden: the build writes the manual pages with it (cli/manpage.h). */
    if (argc == 3 && strcmp(argv[0], "--man-pages") == 0)
        return write_man_pages(&env, argv[1], argv[2]);
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
    /* 'serve' runs its workers at once, each with a connection of its own;
     * every other command uses the store from this thread alone. */
    fxl_store_configure(strcmp(cmd->name, "serve") != 0);

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
        /* A command that writes carries the session's activity in its own
         * transaction: one commit, one flush to disk (fxl/auth.h). */
        if ((flags & CLI_NEEDS_USER) && !(flags & CLI_READONLY) && env.token[0])
            fxl_session_touch_at_commit(env.ctx);
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
