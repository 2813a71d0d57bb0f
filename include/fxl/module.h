/* Modules: code that only a few commands need, kept out of the program's
 * start-up (docs/performance.md, "Modules"). The DICOM Part 10 reader
 * (DCMTK, with libstdc++, ICU and libxml2) and the web console
 * (libmicrohttpd, with GnuTLS) are shared objects that the program loads
 * when a command needs them: linked in, their libraries' relocations made up
 * most of every command's start, `fxledger --version` included.
 *
 * A module is looked for only beside the program (the build tree) and in
 * ../lib/fxledger/modules from the program's directory (the installed tree), by
 * absolute path from /proc/self/exe; never through LD_LIBRARY_PATH. Its
 * `fxl_module_version` must equal the program's version. A module stays
 * loaded until the process ends. */
#ifndef FXL_MODULE_H
#define FXL_MODULE_H

#include <stddef.h>

/* Where an installed program finds its modules, from its own directory. */
#define FXL_MODULE_DIR "../lib/fxledger/modules"

/* The address of `symbol` in the module fxledger-<name>.so, or NULL with a
 * one-line reason in why[0..why_size) (not found where it was looked for,
 * refused by the dynamic loader, another version, no such symbol). */
void *fxl_module_symbol(const char *name, const char *symbol, char *why, size_t why_size);

/* 0 and the path of `file` in `rel` relative to the program's directory
 * (rel "" for the directory itself) in out[0..n) when that is a readable
 * regular file; -1 otherwise. */
int fxl_beside_program(char *out, size_t n, const char *rel, const char *file);

#endif
