/* Loading a module beside the program (include/fxl/module.h). */
#include <dlfcn.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "fxl/module.h"

int fxl_beside_program(char *out, size_t n, const char *rel, const char *file)
{
    char exe[4096];
    ssize_t len;
    struct stat st;
    char *slash;

    len = readlink("/proc/self/exe", exe, sizeof exe - 1);
    if (len <= 0 || (size_t)len >= sizeof exe - 1)
        return -1;
    exe[len] = '\0';
    if ((slash = strrchr(exe, '/')) == NULL)
        return -1;
    *slash = '\0';
    if ((size_t)snprintf(out, n, "%s%s%s/%s", exe, rel[0] ? "/" : "", rel, file) >= n)
        return -1;
    if (stat(out, &st) != 0 || !S_ISREG(st.st_mode) || access(out, R_OK) != 0)
        return -1;
    return 0;
}

void *fxl_module_symbol(const char *name, const char *symbol, char *why, size_t why_size)
{
    static const char *const rel[] = {"", FXL_MODULE_DIR};
    char file[64], path[4096];
    const char *version;
    void *handle = NULL, *sym;
    size_t i;

    snprintf(file, sizeof file, "fxledger-%s.so", name);
    for (i = 0; i < sizeof rel / sizeof rel[0]; i++)
        if (fxl_beside_program(path, sizeof path, rel[i], file) == 0)
            break;
    if (i == sizeof rel / sizeof rel[0]) {
        snprintf(why, why_size,
                 "the module %s is not installed: it is looked for beside the program and in %s "
                 "from its directory; reinstall fxledger", file, FXL_MODULE_DIR);
        return NULL;
    }
    /* RTLD_NOW: a missing library is told here, not half-way through a
     * command. Never closed: the process ends first. */
    if ((handle = dlopen(path, RTLD_NOW | RTLD_LOCAL)) == NULL) {
        snprintf(why, why_size, "cannot load the module %s: %s", path, dlerror());
        return NULL;
    }
    version = (const char *)dlsym(handle, "fxl_module_version");
    if (!version || strcmp(version, FXL_VERSION) != 0) {
        snprintf(why, why_size, "the module %s is of version %s, the program of %s; reinstall fxledger",
                 path, version ? version : "(none)", FXL_VERSION);
        return NULL;
    }
    if ((sym = dlsym(handle, symbol)) == NULL)
        snprintf(why, why_size, "the module %s has no %s", path, symbol);
    return sym;
}
