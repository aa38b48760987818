// The core library's version (declared at the end of etchguard/core.hpp).
#include "etchguard/core.hpp"

#ifndef ETCHGUARD_CORE_VERSION
#define ETCHGUARD_CORE_VERSION "0.1.0"
#endif

namespace etchguard {

const char* core_version() { return ETCHGUARD_CORE_VERSION; }

}  // namespace etchguard
