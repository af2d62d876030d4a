# Runs tests/reference/stats_reference.py into OUT and compares every fixture
# it writes with the committed copy in COMMITTED. Invoked by ctest.
file(REMOVE_RECURSE ${OUT})
file(MAKE_DIRECTORY ${OUT})
execute_process(COMMAND ${PYTHON} ${SCRIPT} ${OUT} RESULT_VARIABLE rc)
if(NOT rc EQUAL 0)
  message(FATAL_ERROR "reference script failed: ${rc}")
endif()
file(GLOB generated RELATIVE ${OUT} ${OUT}/*.tsv)
if(NOT generated)
  message(FATAL_ERROR "reference script wrote no fixtures")
endif()
foreach(f IN LISTS generated)
  execute_process(COMMAND ${CMAKE_COMMAND} -E compare_files ${OUT}/${f} ${COMMITTED}/${f}
                  RESULT_VARIABLE diff)
  if(NOT diff EQUAL 0)
    message(FATAL_ERROR "fixture ${f} differs from the committed copy; regenerate with "
                        "/usr/bin/python3 ${SCRIPT} tests/data/stats")
  endif()
endforeach()
message(STATUS "${generated}: identical")
