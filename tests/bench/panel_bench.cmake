# The panel's frame benchmark: its own executable (it links the UI and needs a
# display), not part of `make test`. Run under xvfb-run, see panel_bench.cpp.
add_executable(kneepoint_panel_bench ${CMAKE_CURRENT_SOURCE_DIR}/panel_bench.cpp)
target_link_libraries(kneepoint_panel_bench PRIVATE kp_panel benchmark::benchmark)
