# Helpers that turn the src/<module> and tests/<module> folders into targets, so adding a file
# needs no CMake edit (globs use CONFIGURE_DEPENDS).

function(plimsoll_warnings target)
  target_compile_options(${target} PRIVATE -Wall -Wextra -Wpedantic -Wshadow -Wnon-virtual-dtor)
  if(PLIMSOLL_WERROR)
    target_compile_options(${target} PRIVATE -Werror)
  endif()
endfunction()

# plimsoll_module(NAME [OBJECT] DEPS dep...): library plimsoll_NAME from src/NAME/*.cc (an
# INTERFACE library while the folder has no sources), public headers from include/. OBJECT keeps
# every object file in whatever links it, so self-registering parts (CLI verbs) are never dropped.
function(plimsoll_module name)
  cmake_parse_arguments(ARG "OBJECT" "" "DEPS" ${ARGN})
  file(GLOB sources CONFIGURE_DEPENDS "${CMAKE_SOURCE_DIR}/src/${name}/*.cc")
  if(ARG_OBJECT)
    set(kind OBJECT)
  else()
    set(kind STATIC)
  endif()
  if(sources)
    add_library(plimsoll_${name} ${kind} ${sources})
    target_include_directories(plimsoll_${name}
      PUBLIC "${CMAKE_SOURCE_DIR}/include" "${CMAKE_BINARY_DIR}/generated"
      PRIVATE "${CMAKE_SOURCE_DIR}/src")
    target_link_libraries(plimsoll_${name} PUBLIC ${ARG_DEPS})
    plimsoll_warnings(plimsoll_${name})
  else()
    add_library(plimsoll_${name} INTERFACE)
    target_include_directories(plimsoll_${name}
      INTERFACE "${CMAKE_SOURCE_DIR}/include" "${CMAKE_BINARY_DIR}/generated")
    target_link_libraries(plimsoll_${name} INTERFACE ${ARG_DEPS})
  endif()
endfunction()

set(PLIMSOLL_TEST_LABELS unit reference integration slow)

# One Catch2 binary per (module, label): test_<module>_<label>, each TEST_CASE its own ctest.
function(plimsoll_tests)
  add_library(plimsoll_catch_main STATIC "${CMAKE_SOURCE_DIR}/tests/catch_main.cc")
  target_link_libraries(plimsoll_catch_main PUBLIC Catch2::Catch2)
  foreach(module ${ARGN})
    file(GLOB all_tests CONFIGURE_DEPENDS "${CMAKE_SOURCE_DIR}/tests/${module}/*_test.cc")
    foreach(label ${PLIMSOLL_TEST_LABELS})
      set(selected "")
      foreach(file ${all_tests})
        get_filename_component(stem ${file} NAME_WE)
        if(stem MATCHES "_(reference|integration|slow)_test$")
          set(file_label ${CMAKE_MATCH_1})
        else()
          set(file_label unit)
        endif()
        if(file_label STREQUAL label)
          list(APPEND selected ${file})
        endif()
      endforeach()
      if(NOT selected)
        continue()
      endif()
      if(PLIMSOLL_UNIT_TESTS_ONLY AND NOT label STREQUAL "unit")
        continue()
      endif()
      set(target test_${module}_${label})
      file(GLOB helpers CONFIGURE_DEPENDS "${CMAKE_SOURCE_DIR}/tests/${module}/*_util.cc")
      add_executable(${target} ${selected} ${helpers})
      target_link_libraries(${target} PRIVATE plimsoll_catch_main plimsoll_${module})
      target_include_directories(${target} PRIVATE "${CMAKE_SOURCE_DIR}/tests" "${CMAKE_SOURCE_DIR}/src")
      target_compile_definitions(${target} PRIVATE
        PLIMSOLL_SOURCE_DIR="${CMAKE_SOURCE_DIR}" PLIMSOLL_BINARY_DIR="${CMAKE_BINARY_DIR}")
      plimsoll_warnings(${target})
      catch_discover_tests(${target}
        TEST_PREFIX "${module}:"
        PROPERTIES LABELS "${label};${module}"
        WORKING_DIRECTORY "${CMAKE_BINARY_DIR}")
    endforeach()
  endforeach()
endfunction()
