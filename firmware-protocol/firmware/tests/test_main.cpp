// Runs every registered case and ends with the "N passed, N failed" line CI reads.
#include <cstdio>

#include "check.h"

int main() {
  int passed = 0, failed = 0;
  for (auto& c : t::cases()) {
    int before = t::failures();
    c.fn();
    if (t::failures() == before) {
      passed++;
      std::printf("  ok    %s\n", c.name);
    } else {
      failed++;
      std::printf("  FAIL  %s\n", c.name);
    }
  }
  std::printf("firmware: %d passed, %d failed\n", passed, failed);
  return failed == 0 ? 0 : 1;
}
