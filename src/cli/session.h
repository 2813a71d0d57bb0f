/* Authentication on the command line: password prompt or --password-fd,
 * the session file, and the re-entered password of a signing act. */
#ifndef FXL_CLI_SESSION_H
#define FXL_CLI_SESSION_H

#include <stddef.h>

#include "cli/cli.h"
#include "fxl/auth.h"

/* The OS account and host of this process, for audit rows. */
const fxl_client *cli_client(void);
const char *cli_os_login(void);

/* Reads one password: a line from --password-fd when given, else from the
 * terminal (/dev/tty) with echo off after `prompt`. 0, or -1/-2 with a
 * message printed (too long; no terminal). */
int cli_read_password(cli_env *env, const char *prompt, char *out, size_t size);

/* The session file for db_path: 0 and token/login when a well-formed file
 * of this OS user, mode 0600, for this database exists; else -1. */
int cli_session_load(const char *db_path, char token[FXL_TOKEN_HEX_LEN + 1], char login[65]);
/* Writes it (0600, atomically); 0 or -1. */
int cli_session_save(const char *db_path, const char *token, const char *login);
void cli_session_remove(const char *db_path);

/* Makes env->ctx act as the authenticated user: the live session of the
 * session file (when --user is absent or names the session's user), else
 * the password for this one command, checked on rw_ctx (which may be
 * env->ctx). Returns 0 or an exit code with the message printed. */
int cli_authenticate(cli_env *env, fxl_ctx *rw_ctx);
/* Wipes what cli_authenticate kept. */
void cli_auth_release(cli_env *env);

/* Before a signing act: re-asks the acting user's password (unless it was
 * entered for this very command) and opens the signing key. 0 or an exit
 * code with the message printed. cli_sign_end wipes the key. */
int cli_sign_begin(cli_env *env, const char *act);
void cli_sign_end(cli_env *env);

/* Reads a new password (at a terminal twice, compared); cmd_login.c. */
int cli_read_new_password(cli_env *env, const char *login, char *out);

#endif
