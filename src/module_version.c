/* Compiled into each module (fxledger-*.so; include/fxl/module.h): the
 * program loads a module only of its own version. */
extern const char fxl_module_version[];
const char fxl_module_version[] = FXL_VERSION;
