// The installed shared library libperiodfit.so is made of the stage archives, linked whole
// (CMakeLists.txt, "the installed library"); CMake wants one source file of its own for it.
// Nothing is defined here.
