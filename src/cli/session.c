/* Who acts on the command line: reading a password (terminal with echo off,
 * or --password-fd), the 0600 session file in the OS user's state
 * directory, authenticating a command and re-asking the password at a
 * signing act. No SQL: everything goes through fxl/auth.h. */
#define _DEFAULT_SOURCE 1 /* realpath */
#include <errno.h>
#include <fcntl.h>
#include <limits.h>
#include <pwd.h>
#include <sodium.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <termios.h>
#include <unistd.h>

#include "cli/cli.h"
#include "cli/session.h"
#include "fxl/audit.h"

/* ---- the client ----------------------------------------------------------------- */

static char os_account[65], host_name[256];

const fxl_client *cli_client(void)
{
    static fxl_client c;
    struct passwd *pw = getpwuid(getuid());

    snprintf(os_account, sizeof os_account, "%s", pw ? pw->pw_name : "unknown");
    if (gethostname(host_name, sizeof host_name) != 0)
        snprintf(host_name, sizeof host_name, "unknown");
    host_name[sizeof host_name - 1] = '\0';
    c.kind = "cli";
    c.os_account = os_account;
    c.host = host_name;
    c.address = NULL;
    return &c;
}

const char *cli_os_login(void)
{
    struct passwd *pw = getpwuid(getuid());
    return pw ? pw->pw_name : "unknown";
}

/* ---- reading a password ------------------------------------------------------------ */

/* One line from fd, byte by byte so that a second password on the same
 * descriptor stays unread for the next call. */
static int read_line_fd(int fd, char *out, size_t size)
{
    size_t n = 0;
    char c;

    for (;;) {
        ssize_t r = read(fd, &c, 1);
        if (r < 0 && errno == EINTR)
            continue;
        if (r <= 0)
            break;
        if (c == '\n')
            break;
        if (n + 1 >= size)
            return -1;
        out[n++] = c;
    }
    out[n] = '\0';
    if (n > 0 && out[n - 1] == '\r')
        out[--n] = '\0';
    return (int)n;
}

int cli_read_password(cli_env *env, const char *prompt, char *out, size_t size)
{
    struct termios old, quiet;
    int fd, rc, echo_off = 0;

    out[0] = '\0';
    if (env->password_fd >= 0) {
        rc = read_line_fd(env->password_fd, out, size);
        if (rc < 0) {
            sodium_memzero(out, size);
            cli_error("the password read from --password-fd is longer than %d characters",
                      FXL_PASSWORD_MAX);
            return -1;
        }
        return 0;
    }
    if ((fd = open("/dev/tty", O_RDWR | O_NOCTTY)) < 0) {
        cli_error("a password is needed and there is no terminal to ask it on "
                  "(log in with 'fxledger login', or give --password-fd N)");
        return -2;
    }
    if (tcgetattr(fd, &old) == 0) {
        quiet = old;
        quiet.c_lflag &= ~(tcflag_t)(ECHO | ECHONL);
        quiet.c_lflag |= ICANON;
        echo_off = tcsetattr(fd, TCSAFLUSH, &quiet) == 0;
    }
    if (write(fd, prompt, strlen(prompt)) < 0) {
        /* the prompt is a courtesy; the read below still works */
    }
    rc = read_line_fd(fd, out, size);
    if (echo_off)
        tcsetattr(fd, TCSAFLUSH, &old);
    if (write(fd, "\n", 1) < 0) {
        /* as above */
    }
    close(fd);
    if (rc < 0) {
        sodium_memzero(out, size);
        cli_error("the password is longer than %d characters", FXL_PASSWORD_MAX);
        return -1;
    }
    return 0;
}

/* ---- the session file ------------------------------------------------------------ */

/* $XDG_STATE_HOME/fxledger/sessions (else ~/.local/state/...), one file per
 * database, named by the SHA-256 of the database's absolute path. */
static int session_path(const char *db_path, char *out, size_t size, int make_dirs)
{
    const char *state = getenv("XDG_STATE_HOME");
    const char *home = getenv("HOME");
    char base[PATH_MAX], dir[PATH_MAX + 16], abs[PATH_MAX], sha[65];
    struct passwd *pw;

    if (!state || state[0] != '/') {
        if (!home || home[0] != '/') {
            pw = getpwuid(getuid());
            home = pw ? pw->pw_dir : NULL;
        }
        if (!home)
            return -1;
        snprintf(base, sizeof base, "%s/.local/state", home);
        if (make_dirs) {
            char tmp[PATH_MAX + 8];
            snprintf(tmp, sizeof tmp, "%s/.local", home);
            mkdir(tmp, 0700);
            mkdir(base, 0700);
        }
    } else {
        snprintf(base, sizeof base, "%s", state);
        if (make_dirs)
            mkdir(base, 0700);
    }
    if (!realpath(db_path, abs))
        snprintf(abs, sizeof abs, "%s", db_path);
    fxl_sha256_hex(sha, abs, strlen(abs));
    snprintf(dir, sizeof dir, "%s/fxledger", base);
    if (make_dirs)
        mkdir(dir, 0700);
    if (strlen(dir) + 48 >= size)
        return -1;
    if (snprintf(out, size, "%s/session-%.32s", dir, sha) >= (int)size)
        return -1;
    return 0;
}

int cli_session_load(const char *db_path, char token[FXL_TOKEN_HEX_LEN + 1], char login[65])
{
    char path[PATH_MAX + 64], line[PATH_MAX + 32], abs[PATH_MAX], db[PATH_MAX + 32] = "";
    struct stat st;
    FILE *f;
    int fd, have_token = 0;

    token[0] = login[0] = '\0';
    if (session_path(db_path, path, sizeof path, 0) != 0)
        return -1;
    if ((fd = open(path, O_RDONLY | O_NOFOLLOW)) < 0)
        return -1;
    /* A session file others can read is not trusted (and not used). */
    if (fstat(fd, &st) != 0 || !S_ISREG(st.st_mode) || (st.st_mode & 077) != 0 ||
        st.st_uid != getuid() || !(f = fdopen(fd, "r"))) {
        close(fd);
        return -1;
    }
    while (fgets(line, sizeof line, f)) {
        line[strcspn(line, "\n")] = '\0';
        if (strncmp(line, "database ", 9) == 0)
            snprintf(db, sizeof db, "%s", line + 9);
        else if (strncmp(line, "login ", 6) == 0)
            snprintf(login, 65, "%s", line + 6);
        else if (strncmp(line, "token ", 6) == 0 && strlen(line + 6) == FXL_TOKEN_HEX_LEN) {
            memcpy(token, line + 6, FXL_TOKEN_HEX_LEN + 1);
            have_token = 1;
        }
    }
    sodium_memzero(line, sizeof line);
    fclose(f);
    if (!realpath(db_path, abs))
        snprintf(abs, sizeof abs, "%s", db_path);
    if (!have_token || strcmp(db, abs) != 0) {
        sodium_memzero(token, FXL_TOKEN_HEX_LEN + 1);
        token[0] = '\0';
        return -1;
    }
    return 0;
}

int cli_session_save(const char *db_path, const char *token, const char *login)
{
    char path[PATH_MAX + 64], tmp[PATH_MAX + 72], abs[PATH_MAX];
    FILE *f;
    int fd, ok;

    if (session_path(db_path, path, sizeof path, 1) != 0)
        return -1;
    if (!realpath(db_path, abs))
        snprintf(abs, sizeof abs, "%s", db_path);
    snprintf(tmp, sizeof tmp, "%s.new", path);
    unlink(tmp);
    if ((fd = open(tmp, O_WRONLY | O_CREAT | O_EXCL | O_NOFOLLOW, 0600)) < 0)
        return -1;
    if (fchmod(fd, 0600) != 0 || !(f = fdopen(fd, "w"))) {
        close(fd);
        unlink(tmp);
        return -1;
    }
    fprintf(f, "fxledger session v1\ndatabase %s\nlogin %s\ntoken %s\n", abs, login, token);
    ok = fflush(f) == 0 && fsync(fileno(f)) == 0;
    ok = (fclose(f) == 0) && ok;
    if (!ok || rename(tmp, path) != 0) {
        unlink(tmp);
        return -1;
    }
    return 0;
}

void cli_session_remove(const char *db_path)
{
    char path[PATH_MAX + 64];

    if (session_path(db_path, path, sizeof path, 0) == 0)
        unlink(path);
}

/* ---- authenticating a command ------------------------------------------------------ */

int cli_authenticate(cli_env *env, fxl_ctx *rw_ctx)
{
    char token[FXL_TOKEN_HEX_LEN + 1], login[65], prompt[160];
    const char *who;
    fxl_identity id;
    int rc;

    if (cli_session_load(env->db_path, token, login) == 0 && (!env->user || strcmp(env->user, login) == 0)) {
        rc = fxl_session_check(env->ctx, token, NULL);
        if (rc == 0) {
            memcpy(env->token, token, sizeof token);
            sodium_memzero(token, sizeof token);
            return 0;
        }
        sodium_memzero(token, sizeof token);
        if (rc == FXL_EPERM || (env->password_fd < 0 && !env->interactive)) {
            cli_error("%s", fxl_errmsg(env->ctx));
            return CLI_EXIT_PERM;
        }
    }
    /* No live session: the password, for this one command. */
    who = env->user ? env->user : cli_os_login();
    if (env->password_fd < 0 && !env->interactive) {
        cli_error("'fxledger %s' needs a login: run 'fxledger login' first, or give the "
                  "password with --password-fd N", env->command);
        return CLI_EXIT_PERM;
    }
    if (!(env->password = sodium_malloc(FXL_PASSWORD_BUF)))
        return CLI_EXIT_DB;
    snprintf(prompt, sizeof prompt, "fxledger: password for '%s': ", who);
    if ((rc = cli_read_password(env, prompt, env->password, FXL_PASSWORD_BUF)) != 0)
        return CLI_EXIT_PERM;
    if (!env->password[0]) {
        cli_error("no password given for '%s': 'fxledger %s' needs a login", who, env->command);
        return CLI_EXIT_PERM;
    }
    rc = fxl_auth_password(rw_ctx, who, env->password, cli_client(), &id);
    if (rc != 0) {
        cli_error("%s", fxl_errmsg(rw_ctx));
        return cli_exit_code(rc);
    }
    if (rw_ctx != env->ctx && (rc = fxl_set_user(env->ctx, id.login)) != 0)
        return cli_fail(env, rc);
    env->password_used = 0;
    return 0;
}

void cli_auth_release(cli_env *env)
{
    if (env->password) {
        sodium_free(env->password);
        env->password = NULL;
    }
    sodium_memzero(env->token, sizeof env->token);
}

/* ---- a signing act ----------------------------------------------------------------- */

int cli_sign_begin(cli_env *env, const char *act)
{
    char *pw = NULL, prompt[300];
    int rc;

    if (!fxl_user_login(env->ctx)) {
        cli_error("%s needs a logged-in user", act);
        return CLI_EXIT_PERM;
    }
    if (env->password && !env->password_used) {
        /* Entered for this very command a moment ago: that is the re-entry. */
        rc = fxl_sign_begin(env->ctx, env->password, cli_client());
        env->password_used = 1;
    } else {
        if (!(pw = sodium_malloc(FXL_PASSWORD_BUF)))
            return CLI_EXIT_DB;
        snprintf(prompt, sizeof prompt, "fxledger: signing (%s) as '%s': password: ", act,
                 fxl_user_login(env->ctx));
        if (env->password_fd < 0 && !env->interactive) {
            sodium_free(pw);
            cli_error("%s is a signing act: it needs the password of '%s' (at a terminal, or "
                      "with --password-fd N)", act, fxl_user_login(env->ctx));
            return CLI_EXIT_PERM;
        }
        if ((rc = cli_read_password(env, prompt, pw, FXL_PASSWORD_BUF)) != 0) {
            sodium_free(pw);
            return CLI_EXIT_PERM;
        }
        rc = fxl_sign_begin(env->ctx, pw, cli_client());
        sodium_free(pw);
    }
    if (rc != 0)
        return cli_fail(env, rc);
    return 0;
}

void cli_sign_end(cli_env *env)
{
    fxl_sign_end(env->ctx);
}
