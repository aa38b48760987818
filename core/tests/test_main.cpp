// main() of etchguard_core_tests: runs every test registered with ETCHGUARD_TEST (see
// check.hpp) and exits nonzero when one failed. Also holds the harness's own checks.
#include <cstring>
#include <exception>
#include <stdexcept>
#include <string>

#include "check.hpp"
#include "etchguard/core.hpp"

ETCHGUARD_TEST(core_version_is_set) {
  const char* v = etchguard::core_version();
  REQUIRE(v != nullptr);
  CHECK(std::strlen(v) > 0);
}

ETCHGUARD_TEST(harness_compares_exactly) {
  CHECK_EQ(0.1 + 0.2, 0.30000000000000004);
  CHECK_EQ(etchguard::i128(1) << 100, (etchguard::i128(1) << 99) * 2);
  CHECK_THROWS(throw std::invalid_argument("x"), std::invalid_argument);
}

int main(int argc, char** argv) {
  auto& registry = etchguard_check::Registry::get();
  long passed = 0, failed = 0;
  for (auto& [name, fn] : registry.tests) {
    if (argc > 1) {
      bool wanted = false;
      for (int i = 1; i < argc; ++i) wanted = wanted || name.find(argv[i]) != std::string::npos;
      if (!wanted) continue;
    }
    registry.current = name.c_str();
    registry.failures_in_current = 0;
    try {
      fn();
    } catch (const etchguard_check::Abort&) {
      // REQUIRE failed; already recorded
    } catch (const std::exception& e) {
      etchguard_check::fail(__FILE__, __LINE__, std::string("uncaught exception: ") + e.what());
    } catch (...) {
      etchguard_check::fail(__FILE__, __LINE__, "uncaught exception of unknown type");
    }
    if (registry.failures_in_current == 0) {
      ++passed;
    } else {
      ++failed;
    }
  }
  std::printf("%ld passed, %ld failed\n", passed, failed);
  return failed == 0 && passed > 0 ? 0 : 1;
}
