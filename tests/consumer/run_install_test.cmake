# ctest entry install_consumer: cmake --install BUILD_DIR into a temporary prefix, configure and
# build tests/consumer/ against it with find_package(periodfit), run the program on a capture
# made by the installed CLI (excite, then a two-channel file by hand), and check pkg-config.
set(work "${BUILD_DIR}/install-test")
file(REMOVE_RECURSE "${work}")
file(MAKE_DIRECTORY "${work}")
set(prefix "${work}/prefix")

function(run)
  execute_process(COMMAND ${ARGN} RESULT_VARIABLE status OUTPUT_VARIABLE out ERROR_VARIABLE err)
  if(NOT status EQUAL 0)
    message(FATAL_ERROR "failed (${status}): ${ARGN}\n${out}\n${err}")
  endif()
  set(run_output "${out}" PARENT_SCOPE)
endfunction()

run(${CMAKE_COMMAND} --install "${BUILD_DIR}" --prefix "${prefix}" --component library)
run(${CMAKE_COMMAND} --install "${BUILD_DIR}" --prefix "${prefix}" --component cli)
foreach(f lib/libperiodfit.so include/periodfit/periodfit.hpp include/periodfit/version.hpp
          include/periodfit/dsp/harmonics.hpp lib/cmake/periodfit/periodfitConfig.cmake
          lib/pkgconfig/periodfit.pc bin/periodfit)
  if(NOT EXISTS "${prefix}/${f}")
    message(FATAL_ERROR "not installed: ${f}")
  endif()
endforeach()
# No installed header may still include a project header by its source-tree path.
file(GLOB_RECURSE headers "${prefix}/include/periodfit/*.hpp")
foreach(h ${headers})
  file(STRINGS "${h}" bad REGEX "#include \"(core|io|dsp|ident|predict|output|report|store|batch)/")
  if(bad)
    message(FATAL_ERROR "${h} includes a source-tree path: ${bad}")
  endif()
endforeach()

run(${CMAKE_COMMAND} -S "${SOURCE_DIR}/tests/consumer" -B "${work}/consumer" -G "${GENERATOR}"
    -DCMAKE_CXX_COMPILER=${CXX} -DCMAKE_PREFIX_PATH=${prefix} -DCMAKE_BUILD_TYPE=Release)
run(${CMAKE_COMMAND} --build "${work}/consumer")

# A capture made by the installed CLI: a 20-line multisine at 1 kHz, 12 periods, written as a
# two-channel CSV whose output is the input (a wire: |H| = 1 at the 20 excited lines).
run("${prefix}/bin/periodfit" excite "${work}/x.csv" --signal multisine --harmonics 1-20 --f0 1000 --rate 48000
    --periods 12 --format csv)
file(STRINGS "${work}/x.csv" lines)
set(csv "time,v_in,v_out\n")
set(first TRUE)
foreach(line ${lines})
  if(first)
    set(first FALSE)
    continue()
  endif()
  string(REPLACE "," ";" fields "${line}")
  list(GET fields 0 t)
  list(GET fields 1 v)
  string(APPEND csv "${t},${v},${v}\n")
endforeach()
file(WRITE "${work}/io.csv" "${csv}")

run("${work}/consumer/consumer" "${work}/io.csv")
set(consumer_output "${run_output}")
if(NOT consumer_output MATCHES "version [0-9]+\\.[0-9]+\\.[0-9]+\n")
  message(FATAL_ERROR "consumer printed no version:\n${consumer_output}")
endif()
if(NOT consumer_output MATCHES "f0_hz 1000(\\.0+[0-9]*)?\n" AND NOT consumer_output MATCHES "f0_hz 999\\.9999")
  message(FATAL_ERROR "consumer's f0 is not 1000 Hz:\n${consumer_output}")
endif()
if(NOT consumer_output MATCHES "frf_points 20\nmag_1 1.000000\n")
  message(FATAL_ERROR "consumer's FRF does not hold the 20 excited lines:\n${consumer_output}")
endif()

# pkg-config finds the same library.
find_program(PKG_CONFIG pkg-config)
if(PKG_CONFIG)
  set(ENV{PKG_CONFIG_PATH} "${prefix}/lib/pkgconfig")
  run(${PKG_CONFIG} --modversion periodfit)
  if(NOT run_output MATCHES "^[0-9]+\\.[0-9]+\\.[0-9]+")
    message(FATAL_ERROR "pkg-config --modversion periodfit: ${run_output}")
  endif()
endif()
message(STATUS "install_consumer: ${consumer_output}")
file(REMOVE_RECURSE "${work}")
