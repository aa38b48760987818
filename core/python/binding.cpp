// PLACEHOLDER binding, replaced by the lead's: the module etchguard._core exposing the
// core to the Python package. Built by the top-level CMakeLists.txt (nanobind, through
// scikit-build-core at `pip install`), linked against the static library etchguard_core.
#include <nanobind/nanobind.h>

#include "etchguard/core.hpp"

namespace nb = nanobind;

NB_MODULE(_core, m) {
  m.doc() = "etchguard's C++ ratio core";
  m.def("core_version", [] { return etchguard::core_version(); },
        "The core library's version.");
}
