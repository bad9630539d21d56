# Run by `cmake --install` (install(SCRIPT)): copies the public headers of every library stage to
# PREFIX/include/periodfit/<stage>/ and rewrites their project includes from "dsp/x.hpp" (the
# source tree's form, src/ on the include path) to "periodfit/dsp/x.hpp", so a consumer needs
# only PREFIX/include on its path and the project's folder names never collide with its own.
# Inputs (set by the install(CODE) that includes this file): PERIODFIT_SOURCE_DIR,
# PERIODFIT_BINARY_DIR, PERIODFIT_INSTALL_STAGES, PERIODFIT_INCLUDEDIR (relative to the prefix).
set(dest "$ENV{DESTDIR}${CMAKE_INSTALL_PREFIX}/${PERIODFIT_INCLUDEDIR}/periodfit")
string(REPLACE ";" "|" stage_alternatives "${PERIODFIT_INSTALL_STAGES}")
function(periodfit_install_header source target)
  file(READ "${source}" text)
  string(REGEX REPLACE "#include \"(${stage_alternatives})/" "#include \"periodfit/\\1/" text "${text}")
  get_filename_component(dir "${target}" DIRECTORY)
  file(MAKE_DIRECTORY "${dir}")
  file(WRITE "${target}" "${text}")
  message(STATUS "Installing: ${target}")
endfunction()
foreach(stage ${PERIODFIT_INSTALL_STAGES})
  file(GLOB headers "${PERIODFIT_SOURCE_DIR}/src/${stage}/*.hpp" "${PERIODFIT_SOURCE_DIR}/src/${stage}/*.inc")
  foreach(header ${headers})
    get_filename_component(name "${header}" NAME)
    periodfit_install_header("${header}" "${dest}/${stage}/${name}")
  endforeach()
endforeach()
periodfit_install_header("${PERIODFIT_SOURCE_DIR}/include/periodfit/periodfit.hpp" "${dest}/periodfit.hpp")
periodfit_install_header("${PERIODFIT_BINARY_DIR}/include/periodfit/version.hpp" "${dest}/version.hpp")
