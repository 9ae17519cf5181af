# The module dependency rule (DEVELOPERS.md, "Layout"), checked on every source file: a file of
# module M may include "X/..." only for X in M's allowed list. Also: no file of the repository
# refers to a path outside it ("../shared"). Run by ctest as repo/layering:
#   cmake -DSOURCE_DIR=<repo> -P cmake/check_layering.cmake
# Exits with an error naming every offending file and line.

cmake_minimum_required(VERSION 3.25)

set(allowed_media "media")
set(allowed_calib "calib;media")
set(allowed_tracker "tracker;calib;media")
set(allowed_analysis "analysis")
set(allowed_synth "synth;analysis;calib;media")
set(allowed_pipeline "pipeline;calib;tracker;analysis;media")
set(allowed_plan "plan;synth;pipeline;analysis")
set(allowed_cli "cli;pipeline;synth;analysis;tracker;calib;media;plan")
set(modules media calib tracker analysis synth pipeline plan cli)

set(problems "")
foreach(module IN LISTS modules)
  file(GLOB sources "${SOURCE_DIR}/${module}/*.h" "${SOURCE_DIR}/${module}/*.cpp")
  foreach(source IN LISTS sources)
    file(STRINGS "${source}" includes REGEX "^#include \"[a-z_]+/")
    foreach(line IN LISTS includes)
      string(REGEX REPLACE "^#include \"([a-z_]+)/.*" "\\1" target "${line}")
      if(target STREQUAL "dropfit")  # the generated version header
        continue()
      endif()
      if(NOT target IN_LIST allowed_${module})
        file(RELATIVE_PATH rel "${SOURCE_DIR}" "${source}")
        string(APPEND problems "  ${rel}: ${line} (${module} may use: ${allowed_${module}})\n")
      endif()
    endforeach()
  endforeach()
endforeach()

# No path outside the repository in code, tests, scripts or documents.
file(GLOB_RECURSE tracked LIST_DIRECTORIES false
  "${SOURCE_DIR}/*.h" "${SOURCE_DIR}/*.cpp" "${SOURCE_DIR}/*.md" "${SOURCE_DIR}/*.txt" "${SOURCE_DIR}/*.sh"
  "${SOURCE_DIR}/*.cmake" "${SOURCE_DIR}/dev" "${SOURCE_DIR}/.ci/*")
foreach(f IN LISTS tracked)
  if(f MATCHES "/build[^/]*/" OR f MATCHES "/\\.git/" OR f MATCHES "check_layering\\.cmake$")
    continue()
  endif()
  file(STRINGS "${f}" outside REGEX "\\.\\./shared")
  foreach(line IN LISTS outside)
    file(RELATIVE_PATH rel "${SOURCE_DIR}" "${f}")
    string(APPEND problems "  ${rel}: refers outside the repository: ${line}\n")
  endforeach()
endforeach()

if(problems)
  message(FATAL_ERROR "layering check failed:\n${problems}")
endif()
message(STATUS "layering check: every include follows the module rule; no path outside the repository")
