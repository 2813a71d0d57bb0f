/* Files the program writes (exports): created beside the target under a
 * temporary name with O_CREAT | O_EXCL | O_NOFOLLOW and mode 0600, then
 * linked to the target name, which fails if anything exists there, so an
 * existing file is never replaced and a failed run leaves nothing. */
#ifndef FXL_CLI_OUTFILE_TMP_H
#define FXL_CLI_OUTFILE_TMP_H

#include <stdio.h>

typedef struct cli_outfile {
    FILE *f;
    char target[4096];
    char temp[4200];
} cli_outfile;

/* Opens the temporary file for `path`; prints the error and returns -1 when
 * path exists or cannot be created. */
int cli_outfile_open(cli_outfile *o, const char *path);
/* ok: flush, sync and link to the target (prints an error and returns -1 if
 * that fails); else discard. The temporary file is removed either way. */
int cli_outfile_close(cli_outfile *o, int ok);

#endif
