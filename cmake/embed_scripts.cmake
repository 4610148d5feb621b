# Writes OUT, a C source holding the figure scripts SCRIPT_DIR/NAME.gp for
# each NAME of NAMES (comma-separated) as NUL-terminated byte arrays, so that
# the program draws its figures without knowing where the source tree lies:
#   cmake -DOUT=file.c -DSCRIPT_DIR=plots -DNAMES=style,history -P embed_scripts.cmake
set(body "/* Generated from the scripts in plots/ by cmake/embed_scripts.cmake: do not edit. */\n#include \"figures.h\"\n\n")
set(table "const cli_figure_script cli_figure_scripts[] = {\n")
set(count 0)
string(REPLACE "," ";" names "${NAMES}")
foreach(name IN LISTS names)
  file(READ ${SCRIPT_DIR}/${name}.gp hex HEX)
  string(REGEX REPLACE "([0-9a-f][0-9a-f])" "0x\\1," bytes "${hex}")
  string(APPEND body "static const char script_${name}[] = {${bytes}0x00};\n")
  string(APPEND table "    {\"${name}\", script_${name}},\n")
  math(EXPR count "${count} + 1")
endforeach()
string(APPEND table "};\nconst int cli_figure_script_count = ${count};\n")
file(WRITE ${OUT}.new "${body}\n${table}")
# Replace the file only when it changed, so that nothing rebuilds needlessly.
execute_process(COMMAND ${CMAKE_COMMAND} -E copy_if_different ${OUT}.new ${OUT})
file(REMOVE ${OUT}.new)
