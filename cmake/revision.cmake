# Writes prefsift_version.h with the source revision at BUILD time (not only at
# configure time), so provenance names the commit the binary was built from.
# "-modified" marks a build from a working tree with uncommitted changes.
# configure_file rewrites the header only when its text changes, so an
# unchanged revision recompiles nothing.
# Inputs: SRC (source dir), IN (version.h.in), OUT (header), PROJECT_VERSION.
execute_process(COMMAND git rev-parse --short=12 HEAD
  WORKING_DIRECTORY ${SRC} OUTPUT_VARIABLE PREFSIFT_REVISION
  OUTPUT_STRIP_TRAILING_WHITESPACE ERROR_QUIET RESULT_VARIABLE rc)
if(NOT rc EQUAL 0 OR NOT PREFSIFT_REVISION)
  set(PREFSIFT_REVISION "unknown")
else()
  execute_process(COMMAND git status --porcelain --untracked-files=no
    WORKING_DIRECTORY ${SRC} OUTPUT_VARIABLE changes OUTPUT_STRIP_TRAILING_WHITESPACE ERROR_QUIET)
  if(changes)
    set(PREFSIFT_REVISION "${PREFSIFT_REVISION}-modified")
  endif()
endif()
configure_file(${IN} ${OUT} @ONLY)
