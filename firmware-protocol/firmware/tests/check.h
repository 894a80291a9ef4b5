// A very small test harness: named cases, checks that report file:line and keep going, and the closing line
// "N passed, N failed" that CI reads. Host-only, so it may use the C++ standard library.
#pragma once

#include <cstdio>
#include <functional>
#include <string>
#include <vector>

namespace t {

struct Case {
  const char* name;
  std::function<void()> fn;
};

inline std::vector<Case>& cases() {
  static std::vector<Case> all;
  return all;
}
inline int& failures() {
  static int n = 0;
  return n;
}

struct Register {
  Register(const char* name, std::function<void()> fn) { cases().push_back({name, std::move(fn)}); }
};

inline void fail(const char* file, int line, const std::string& what) {
  failures()++;
  std::fprintf(stderr, "    %s:%d: %s\n", file, line, what.c_str());
}

}  // namespace t

#define TCAT2(a, b) a##b
#define TCAT(a, b) TCAT2(a, b)
#define TEST_CASE(name) \
  static void TCAT(test_fn_, __LINE__)(); \
  static t::Register TCAT(test_reg_, __LINE__)(name, TCAT(test_fn_, __LINE__)); \
  static void TCAT(test_fn_, __LINE__)()

#define CHECK(cond) \
  do { \
    if (!(cond)) t::fail(__FILE__, __LINE__, "CHECK(" #cond ")"); \
  } while (0)

#define CHECK_EQ(a, b) \
  do { \
    auto va_ = (a); \
    auto vb_ = (b); \
    if (!(va_ == vb_)) t::fail(__FILE__, __LINE__, std::string("CHECK_EQ(" #a ", " #b "): ") + t::show(va_) + " != " + t::show(vb_)); \
  } while (0)

#define CHECK_NEAR(a, b, tol) \
  do { \
    double va_ = (a), vb_ = (b); \
    if (!(va_ - vb_ <= (tol) && vb_ - va_ <= (tol))) t::fail(__FILE__, __LINE__, std::string("CHECK_NEAR(" #a ", " #b "): ") + std::to_string(va_) + " vs " + std::to_string(vb_)); \
  } while (0)

namespace t {
inline std::string show(const std::string& s) { return "\"" + s + "\""; }
inline std::string show(const char* s) { return s ? "\"" + std::string(s) + "\"" : "null"; }
inline std::string show(bool b) { return b ? "true" : "false"; }
template <typename T>
std::string show(const T& v) {
  return std::to_string(v);
}
}  // namespace t
