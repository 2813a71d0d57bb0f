/* Output files that never replace an existing file and are private (0600). */
#include "cli/outfile_tmp.h"

#include <errno.h>
#include <fcntl.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "cli/cli.h"

int cli_outfile_open(cli_outfile *o, const char *path)
{
    struct stat st;
    int fd, i;

    memset(o, 0, sizeof *o);
    if (!path || !*path || strlen(path) >= sizeof o->target) {
        cli_error("output file name is empty or too long");
        return -1;
    }
    if (lstat(path, &st) == 0) {
        cli_error("output file '%s' already exists; fxledger never replaces a file", path);
        return -1;
    }
    snprintf(o->target, sizeof o->target, "%s", path);
    for (i = 0; i < 100; i++) {
        snprintf(o->temp, sizeof o->temp, "%s.tmp%ld.%d", path, (long)getpid(), i);
        fd = open(o->temp, O_WRONLY | O_CREAT | O_EXCL | O_NOFOLLOW | O_CLOEXEC, 0600);
        if (fd >= 0)
            break;
        if (errno != EEXIST) {
            cli_error("cannot create '%s': %s", path, strerror(errno));
            return -1;
        }
    }
    if (fd < 0 || !(o->f = fdopen(fd, "w"))) {
        if (fd >= 0) {
            close(fd);
            unlink(o->temp);
        }
        cli_error("cannot create '%s'", path);
        return -1;
    }
    return 0;
}

int cli_outfile_close(cli_outfile *o, int ok)
{
    int rc = 0;

    if (!o->f)
        return 0;
    if (ok && (fflush(o->f) != 0 || ferror(o->f) || fsync(fileno(o->f)) != 0)) {
        cli_error("could not write '%s': %s", o->target, strerror(errno));
        ok = 0;
        rc = -1;
    }
    fclose(o->f);
    o->f = NULL;
    if (ok && link(o->temp, o->target) != 0) {
        cli_error(errno == EEXIST ? "output file '%s' appeared while writing; not replaced"
                                  : "cannot create '%s'", o->target);
        rc = -1;
    }
    unlink(o->temp);
    return rc;
}
