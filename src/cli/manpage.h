/* Manual pages from the same tables that --help prints (docs/deployment.md).
 * The hidden mode 'fxledger --man-pages DIR DATE' (run by the build) writes
 * fxledger.1 and one fxledger-COMMAND.1 per command into DIR: while it runs,
 * cli_parse and cli_dispatch_sub print roff instead of plain help, so the
 * pages cannot drift from the option tables. */
#ifndef FXL_CLI_MANPAGE_H
#define FXL_CLI_MANPAGE_H

#include <stdio.h>

#include "cli/cli.h"

/* Set while the pages are written. */
extern int cli_man_mode;

/* Writes text as roff body text: escapes backslashes, minus signs that start
 * an option, and control characters at line starts; a blank line becomes a
 * paragraph break and an indented line starts a new output line. */
void cli_man_text(FILE *out, const char *text);

/* Writes one word (a name, a placeholder) for a macro argument: every '-'
 * as \\-, no quotes, no line break. */
void cli_man_word(FILE *out, const char *word);

/* The roff for one (sub-)command's help: synopsis, about and options. */
void cli_man_usage(const char *synopsis, const char *about, const cli_opt *opts);

/* The roff for a family's help, then each sub-command's section. */
int cli_man_family(cli_env *env, const cli_sub *subs, const char *about, const char *family);

#endif
