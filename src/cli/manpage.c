/* roff output of the help tables (cli/manpage.h); groff_man(7) macros only. */
#include <string.h>

#include "cli/manpage.h"

int cli_man_mode;
/* The family and sub-command being written, NULL for a single command. */
static const char *man_family, *man_sub;

/* A '-' that starts a word is an option's minus sign in roff (\-); a hyphen
 * inside a word stays a hyphen (groff_char(7)). */
static void put_escaped(FILE *out, const char *s, size_t n)
{
    size_t i;

    for (i = 0; i < n; i++) {
        char c = s[i];
        if (c == '\\')
            fputs("\\e", out);
        else if (c == '-' && (i == 0 || strchr(" \t([/'\"-=|,", s[i - 1])))
            fputs("\\-", out);
        else
            fputc(c, out);
    }
}

void cli_man_word(FILE *out, const char *word)
{
    for (; *word; word++) {
        if (*word == '\\')
            fputs("\\e", out);
        else if (*word == '-')
            fputs("\\-", out);
        else if (*word != '"' && *word != '\n')
            fputc(*word, out);
    }
}

void cli_man_text(FILE *out, const char *text)
{
    const char *p = text;

    while (*p) {
        const char *nl = strchr(p, '\n');
        size_t n = nl ? (size_t)(nl - p) : strlen(p);
        size_t lead = 0;

        while (lead < n && (p[lead] == ' ' || p[lead] == '\t'))
            lead++;
        if (lead == n) {
            fputs(".PP\n", out);
        } else {
            if (lead > 0)
                fputs(".br\n", out);
            /* A line starting with '.' or '\'' would be a request. */
            if (p[lead] == '.' || p[lead] == '\'')
                fputs("\\&", out);
            put_escaped(out, p + lead, n - lead);
            fputc('\n', out);
        }
        if (!nl)
            break;
        p = nl + 1;
    }
}

void cli_man_usage(const char *synopsis, const char *about, const cli_opt *opts)
{
    const cli_opt *o;

    if (man_sub) {
        printf(".SS \"fxledger ");
        cli_man_word(stdout, man_family);
        printf(" ");
        cli_man_word(stdout, man_sub);
        printf("\"\n.B fxledger\n");
        cli_man_text(stdout, synopsis);
        if (about) {
            printf(".PP\n");
            cli_man_text(stdout, about);
        }
        printf(".PP\nOptions:\n");
    } else {
        printf(".SH SYNOPSIS\n.B fxledger\n");
        cli_man_text(stdout, synopsis);
        if (about) {
            printf(".SH DESCRIPTION\n");
            cli_man_text(stdout, about);
        }
        printf(".SH OPTIONS\n");
    }
    for (o = opts; o && o->name; o++) {
        printf(".TP\n.%s \"\\-\\-", o->arg ? "BI" : "B");
        cli_man_word(stdout, o->name);
        if (o->arg) {
            printf(" \" \"");
            cli_man_word(stdout, o->arg);
        }
        printf("\"\n");
        cli_man_text(stdout, o->help);
    }
    printf(".TP\n.B \\-\\-json\nmachine\\-readable output (global option, see\n.BR fxledger (1))\n"
           ".TP\n.B \\-\\-help\nthis help\n");
}

int cli_man_family(cli_env *env, const cli_sub *subs, const char *about, const char *family)
{
    const cli_sub *s;
    int rc = 0;

    printf(".SH DESCRIPTION\n");
    cli_man_text(stdout, about);
    printf(".PP\nSub\\-commands of\n.BR \"fxledger ");
    cli_man_word(stdout, family);
    printf("\" :\n");
    for (s = subs; s->name; s++) {
        printf(".TP\n.B ");
        cli_man_word(stdout, s->name);
        printf("\n");
        cli_man_text(stdout, s->summary);
    }
    printf(".SH SUB-COMMANDS\n");
    for (s = subs; s->name; s++) {
        char *argv[] = {(char *)s->name, "--help", NULL};
        man_family = family;
        man_sub = s->name;
        if (s->run(env, 2, argv) != CLI_EXIT_OK)
            rc = CLI_EXIT_USAGE;
    }
    man_family = man_sub = NULL;
    return rc;
}
