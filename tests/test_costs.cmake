# Read by tests/CMakeLists.txt for the script tests it adds (named in pinchoff_cost_tests);
# the runner's own cases get theirs in tests/register_tests.cmake. Each line of
# test_costs.txt is "SECONDS NAME": the test's run time measured on the sanitizer build. It
# becomes the test's COST, and `ctest -j` starts the tests in falling order of cost, so the
# long render and aliasing tests start first and the short ones fill in beside them, rather
# than a long test starting last with the other core idle. (ctest's own record of past
# times, Testing/Temporary/CTestCostData.txt, cannot hold names with spaces before CMake
# 3.32, and a fresh build folder has none.) A test missing from the list costs 0 and runs
# among the short ones. Refresh the list with scripts/test-costs after tests change much.
file(STRINGS "${CMAKE_CURRENT_LIST_DIR}/test_costs.txt" pinchoff_cost_lines)
foreach(pinchoff_cost_line IN LISTS pinchoff_cost_lines)
  if(pinchoff_cost_line MATCHES "^([0-9.]+) (.+)$")
    set(pinchoff_cost_name "${CMAKE_MATCH_2}")
    list(FIND pinchoff_cost_tests "${pinchoff_cost_name}" pinchoff_cost_at)
    if(pinchoff_cost_at GREATER -1)
      set_tests_properties("${pinchoff_cost_name}" PROPERTIES COST ${CMAKE_MATCH_1})
    endif()
  endif()
endforeach()
