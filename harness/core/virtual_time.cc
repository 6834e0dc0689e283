#include "harness/core/virtual_time.h"

#include <cstdio>
#include <cstdlib>

namespace weir {

std::string FormatTime(VirtualTime t) {
  if (t == kNever) return "never";
  const bool negative = t < 0;
  const unsigned long long abs =
      negative ? 0ULL - static_cast<unsigned long long>(t) : static_cast<unsigned long long>(t);
  char buf[48];
  std::snprintf(buf, sizeof buf, "%s%llu.%09llus", negative ? "-" : "", abs / 1000000000ULL, abs % 1000000000ULL);
  return buf;
}

}  // namespace weir
