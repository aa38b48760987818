// A tiny self-contained check harness for the core's tests (no gtest).
//
// Write a test file in core/tests/ (every *.cpp there is built into etchguard_core_tests):
//
//   #include "check.hpp"
//
//   ETCHGUARD_TEST(union_area_of_two_overlapping_rects) {
//     CHECK(1 + 1 == 2);                       // records a failure, the test goes on
//     CHECK_EQ(area(a, b), etchguard::i128(42)); // prints both sides on failure
//     REQUIRE(ptr != nullptr);                 // records a failure and ends this test
//   }
//
// CHECK(cond) / REQUIRE(cond)       a condition
// CHECK_EQ(a, b) / REQUIRE_EQ(a, b) an equality (exact: doubles compared with ==;
//                                    printed with %.17g; __int128 printed in full)
// CHECK_THROWS(expr, Exception)     expr must throw Exception (or a subclass)
//
// main() (test_main.cpp) runs every registered test in name order and prints one line
// per failure (file:line, the expression, the values) and a closing line
// "N passed, N failed"; it exits 1 if any check failed or a test threw (or no test
// ran), else 0.
// Arguments: substrings; only tests whose names contain one of them run.
// A test that throws an uncaught exception fails with the exception's what().
#pragma once

#include <cstdint>
#include <cstdio>
#include <functional>
#include <map>
#include <sstream>
#include <string>
#include <type_traits>

namespace etchguard_check {

struct Registry {
  std::map<std::string, std::function<void()>> tests;
  const char* current = "";
  long failures_in_current = 0;
  static Registry& get() {
    static Registry r;
    return r;
  }
};

struct Register {
  Register(const char* name, void (*fn)()) { Registry::get().tests.emplace(name, fn); }
};

// Thrown by REQUIRE to end the current test.
struct Abort {};

inline std::string show_i128(__int128 v) {
  if (v == 0) return "0";
  bool neg = v < 0;
  unsigned __int128 u = neg ? -static_cast<unsigned __int128>(v) : static_cast<unsigned __int128>(v);
  std::string s;
  while (u) {
    s.insert(s.begin(), char('0' + int(u % 10)));
    u /= 10;
  }
  return neg ? "-" + s : s;
}

template <typename T>
std::string show(const T& v) {
  if constexpr (std::is_floating_point_v<T>) {
    char buf[40];
    std::snprintf(buf, sizeof buf, "%.17g", double(v));
    return buf;
  } else if constexpr (std::is_same_v<T, __int128>) {
    return show_i128(v);
  } else if constexpr (std::is_same_v<T, bool>) {
    return v ? "true" : "false";
  } else if constexpr (std::is_enum_v<T>) {
    return std::to_string(static_cast<long long>(v));
  } else if constexpr (std::is_integral_v<T>) {
    return std::to_string(v);
  } else if constexpr (std::is_convertible_v<T, std::string>) {
    return "\"" + std::string(v) + "\"";
  } else {
    return "(value)";
  }
}

inline void fail(const char* file, int line, const std::string& what) {
  Registry& r = Registry::get();
  ++r.failures_in_current;
  std::fprintf(stderr, "FAIL %s (%s:%d): %s\n", r.current, file, line, what.c_str());
}

template <typename A, typename B>
bool check_eq(const A& a, const B& b, const char* ea, const char* eb, const char* file,
              int line) {
  if (a == b) return true;
  fail(file, line, std::string(ea) + " == " + eb + "  [" + show(a) + " vs " + show(b) + "]");
  return false;
}

}  // namespace etchguard_check

#define ETCHGUARD_CHECK_CAT2(a, b) a##b
#define ETCHGUARD_CHECK_CAT(a, b) ETCHGUARD_CHECK_CAT2(a, b)

// Defines and registers a test; the body follows in braces.
#define ETCHGUARD_TEST(name)                                                   \
  static void etchguard_test_##name();                                         \
  static ::etchguard_check::Register ETCHGUARD_CHECK_CAT(etchguard_reg_, name)( \
      #name, &etchguard_test_##name);                                          \
  static void etchguard_test_##name()

#define CHECK(cond)                                                               \
  do {                                                                            \
    if (!(cond)) ::etchguard_check::fail(__FILE__, __LINE__, "CHECK(" #cond ")"); \
  } while (0)

#define REQUIRE(cond)                                                               \
  do {                                                                              \
    if (!(cond)) {                                                                  \
      ::etchguard_check::fail(__FILE__, __LINE__, "REQUIRE(" #cond ")");            \
      throw ::etchguard_check::Abort{};                                             \
    }                                                                               \
  } while (0)

#define CHECK_EQ(a, b) \
  ((void)::etchguard_check::check_eq((a), (b), #a, #b, __FILE__, __LINE__))

#define REQUIRE_EQ(a, b)                                                         \
  do {                                                                           \
    if (!::etchguard_check::check_eq((a), (b), #a, #b, __FILE__, __LINE__))      \
      throw ::etchguard_check::Abort{};                                          \
  } while (0)

#define CHECK_THROWS(expr, Exception)                                                 \
  do {                                                                                \
    bool etchguard_thrown_ = false;                                                   \
    try {                                                                             \
      (void)(expr);                                                                   \
    } catch (const Exception&) {                                                      \
      etchguard_thrown_ = true;                                                       \
    } catch (...) {                                                                   \
    }                                                                                 \
    if (!etchguard_thrown_)                                                           \
      ::etchguard_check::fail(__FILE__, __LINE__,                                     \
                              "CHECK_THROWS(" #expr ", " #Exception "): did not throw " \
                              #Exception);                                            \
  } while (0)
