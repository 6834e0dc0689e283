// File: parsers_fuzz.cc
//
// libFuzzer targets for weir's hand-edited input files: scenario, fault plan,
// profile and suite parsers. One source, one target per parser, chosen by the
// WEIR_FUZZ_PARSER macro at compile time (see CMakeLists.txt here).
//
// Contract checked on every input: the parser returns (no crash, no
// sanitizer report, no exception) and every error names a location
// "path:line:column: " and is InvalidArgument — the promise weir's CLI makes
// to users (exit 2 with file:line:column).
#include <cstddef>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <string>
#include <string_view>

#include "absl/status/status.h"
#include "absl/strings/match.h"
#include "harness/scenario/plan_file.h"
#include "harness/scenario/profile_file.h"
#include "harness/scenario/scenario_file.h"
#include "harness/suite/suite_file.h"

namespace {

#if WEIR_FUZZ_PARSER == 4
// Suites name scenarios relative to their own directory: put the fuzzed suite
// (never written to disk) beside the bundled suites so its seeds resolve.
std::string SuitePath() {
  const char* dir = std::getenv("WEIR_SOURCE_DIR");
  return std::string(dir != nullptr ? dir : ".") + "/fixtures/suites/fuzz-input.suite";
}
#endif

void CheckError(const absl::Status& st, std::string_view path) {
  if (st.ok()) return;
  // Read errors cannot happen for text in memory, except a suite's scenario.
  const bool located =
      absl::StartsWith(st.message(), std::string(path) + ":") || absl::StrContains(st.message(), ".scenario:");
  if (st.code() != absl::StatusCode::kInvalidArgument || !located) {
    std::fprintf(stderr, "error without a location or of the wrong kind: %s\n", st.ToString().c_str());
    std::abort();
  }
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string_view text(reinterpret_cast<const char*>(data), size);
#if WEIR_FUZZ_PARSER == 1
  CheckError(weir::ParseScenario("in.scenario", text).status(), "in.scenario");
#elif WEIR_FUZZ_PARSER == 2
  CheckError(weir::ParseFaultPlan("in.plan", text).status(), "in.plan");
#elif WEIR_FUZZ_PARSER == 3
  CheckError(weir::ParseProfile("in.profile", text).status(), "in.profile");
#elif WEIR_FUZZ_PARSER == 4
  static const std::string path = SuitePath();
  CheckError(weir::ParseSuite(path, text).status(), path);
#else
#error "define WEIR_FUZZ_PARSER"
#endif
  return 0;
}
