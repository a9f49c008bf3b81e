# Read by ctest when it starts (tests/CMakeLists.txt makes it one of the folder's
# TEST_INCLUDE_FILES, with RUNNER, COSTS, OUT, WORKDIR and TESTS_DIR set): lists the test
# runner's cases, writes OUT, the ctest file that registers them, and reads it. A test case
# named in COSTS (tests/test_costs.txt: the ones that took a second or more under the
# sanitizers) is a ctest test of its own, under its own name; the other cases of each test
# file run together, in one process, as the test "FOLDER/test_FILE.cpp, its short cases". A
# sanitized start of the runner costs about 0.17 CPU-s, and most cases take less than that.
# Each test gets its COST from the list (a group too, when it took a second or more).
#
# `ctest -R` finds a short case by its file; run one case alone with
# `pinchoff_tests --test-case="NAME"`.

function(pinchoff_quote out value)
  # A bracket argument holds any text but a closing bracket of its own level.
  set(${out} "[==[${value}]==]" PARENT_SCOPE)
endfunction()

function(pinchoff_filter_escape out value)
  # doctest's filters are comma-separated: a comma inside a name is written \,
  string(REPLACE "," "\\," value "${value}")
  set(${out} "${value}" PARENT_SCOPE)
endfunction()

if(NOT EXISTS "${RUNNER}")
  # Not built: one test that says so, rather than a suite that passes with nothing in it.
  add_test("the test runner is built" "${RUNNER}")
  return()
endif()
execute_process(COMMAND "${RUNNER}" --list-test-cases --reporters=xml
  OUTPUT_VARIABLE listing RESULT_VARIABLE status ERROR_VARIABLE errors)
if(NOT status EQUAL 0)
  message(FATAL_ERROR "listing the test cases of ${RUNNER} failed (${status}): ${errors}")
endif()

# A semicolon would split a CMake list: inside names it is held as the control character
# U+0001 (which no name holds) and written back in the ctest file.
string(ASCII 1 semicolon)
set(long_names)
if(EXISTS "${COSTS}")
  file(READ "${COSTS}" costs_text)
  string(REPLACE ";" "${semicolon}" costs_text "${costs_text}")
  string(REPLACE "\n" ";" cost_lines "${costs_text}")
  foreach(cost_line IN LISTS cost_lines)
    if(cost_line MATCHES "^([0-9.]+) (.+)$")
      list(APPEND long_names "${CMAKE_MATCH_2}")
      string(MD5 cost_key "${CMAKE_MATCH_2}")
      set(cost_of_${cost_key} "${CMAKE_MATCH_1}")
    endif()
  endforeach()
endif()

set(script "")
set(files)
set(all_lower_names)
string(REPLACE ";" "${semicolon}" listing "${listing}")
string(REGEX MATCHALL "<TestCase [^>]*>" cases "${listing}")
foreach(case IN LISTS cases)
  if(NOT case MATCHES "name=\"([^\"]*)\" filename=\"([^\"]*)\"")
    message(FATAL_ERROR "unexpected listing line: ${case}")
  endif()
  set(name "${CMAKE_MATCH_1}")
  set(file "${CMAKE_MATCH_2}")
  # The reporter's XML escapes (&amp; last, so "&amp;lt;" stays "&lt;").
  foreach(var name file)
    string(REPLACE "&lt;" "<" ${var} "${${var}}")
    string(REPLACE "&gt;" ">" ${var} "${${var}}")
    string(REPLACE "&quot;" "\"" ${var} "${${var}}")
    string(REPLACE "&apos;" "'" ${var} "${${var}}")
    string(REPLACE "&amp;" "&" ${var} "${${var}}")
  endforeach()
  # ctest runs a named case by its name, through doctest's filter, which ignores case: two
  # cases of one name, in any case, would both run there.
  string(TOLOWER "${name}" lower_name)
  list(APPEND all_lower_names "${lower_name}")
  string(MD5 name_key "${lower_name}")
  if(DEFINED seen_${name_key})
    message(FATAL_ERROR "two test cases are named \"${name}\" (${seen_${name_key}} and ${file}; doctest's filters ignore case): rename one")
  endif()
  set(seen_${name_key} "${file}")
  string(MD5 key "${file}")
  list(FIND files "${key}" known)
  if(known EQUAL -1)
    list(APPEND files "${key}")
    set(file_of_${key} "${file}")
    set(short_of_${key} 0)
    set(long_of_${key} "")
  endif()
  list(FIND long_names "${name}" at)
  if(at GREATER -1)
    string(MD5 cost_key "${name}")
    pinchoff_quote(q_name "${name}")
    pinchoff_filter_escape(f_name "${name}")
    pinchoff_quote(q_filter "--test-case=${f_name}")
    # Its COST: `ctest -j` starts the costliest first, so a long one does not start last
    # with the other core idle (a group not in the list costs 0 and fills in beside them).
    string(APPEND script "add_test(${q_name} \"${RUNNER}\" ${q_filter})\n"
      "set_tests_properties(${q_name} PROPERTIES WORKING_DIRECTORY \"${WORKDIR}\" COST ${cost_of_${cost_key}})\n")
    if(long_of_${key} STREQUAL "")
      set(long_of_${key} "${f_name}")
    else()
      set(long_of_${key} "${long_of_${key}},${f_name}")
    endif()
  else()
    math(EXPR short_of_${key} "${short_of_${key}} + 1")
  endif()
endforeach()

# doctest's filters read * and ? as wildcards: a case run by its name must match no other.
foreach(name IN LISTS long_names)
  if(NOT name MATCHES "[*?]")
    continue()
  endif()
  string(TOLOWER "${name}" pattern)
  # The regular expression's own special characters match any one character there (at
  # worst a false alarm, never a miss).
  string(REGEX REPLACE "[][.+^$()|\\{}]" "." pattern "${pattern}")
  string(REPLACE "*" ".*" pattern "${pattern}")
  string(REPLACE "?" "." pattern "${pattern}")
  set(matched 0)
  foreach(other IN LISTS all_lower_names)
    if(other MATCHES "^${pattern}$")
      math(EXPR matched "${matched} + 1")
    endif()
  endforeach()
  if(matched GREATER 1)
    message(FATAL_ERROR "the test case \"${name}\" is run by its name, and its * or ? makes that name match ${matched} cases: rename it")
  endif()
endforeach()

foreach(key IN LISTS files)
  if(short_of_${key} EQUAL 0)
    continue()
  endif()
  set(file "${file_of_${key}}")
  file(RELATIVE_PATH shown "${TESTS_DIR}" "${file}")
  set(test_name "${shown}, its short cases")
  pinchoff_filter_escape(f_file "${file}")
  pinchoff_quote(q_name "${test_name}")
  pinchoff_quote(q_file "--source-file=${f_file}")
  set(command "\"${RUNNER}\" ${q_file}")
  if(NOT long_of_${key} STREQUAL "")
    pinchoff_quote(q_exclude "--test-case-exclude=${long_of_${key}}")
    string(APPEND command " ${q_exclude}")
  endif()
  string(MD5 cost_key "${test_name}")
  set(cost "")
  if(DEFINED cost_of_${cost_key})
    set(cost " COST ${cost_of_${cost_key}}")
  endif()
  string(APPEND script "add_test(${q_name} ${command})\n"
    "set_tests_properties(${q_name} PROPERTIES WORKING_DIRECTORY \"${WORKDIR}\"${cost})\n")
endforeach()

string(REPLACE "${semicolon}" ";" script "${script}")
file(WRITE "${OUT}.tmp" "${script}")
file(RENAME "${OUT}.tmp" "${OUT}")
include("${OUT}")
