# Turns the numbered files in sql/ into a C array of migrations.
# Called by the build with -DOUT=<file.c> -DFILES=<list of .sql files>.
set(body "/* generated from the sql/ migrations by cmake/embed_sql.cmake; do not edit */\n")
string(APPEND body "#include \"store/migrations.h\"\n\n")
set(table "")
set(index 0)
foreach(f ${FILES})
  get_filename_component(name ${f} NAME)
  string(SUBSTRING ${name} 0 3 num)
  math(EXPR version "${num}")  # strips leading zeros
  file(READ ${f} hex HEX)
  string(REGEX REPLACE "([0-9a-f][0-9a-f])" "0x\\1," bytes "${hex}")
  string(APPEND body "static const char sql_${index}[] = {${bytes}0x00};\n")
  string(APPEND table "    {${version}, \"${name}\", sql_${index}},\n")
  math(EXPR index "${index} + 1")
endforeach()
string(APPEND body "\nconst struct fxl_migration fxl_migrations[] = {\n${table}};\n")
string(APPEND body "const int fxl_migration_count = ${index};\n")
file(WRITE ${OUT} "${body}")
