// File: suite_file.h
//
// Suite files: a weir.v1.Suite in Protobuf text format naming scenarios (paths
// relative to the suite file), a seed budget and optionally a profile. Loading
// reads and validates every scenario it names and the profile, and computes
// the suite digest: SHA-256 over the suite file's bytes, each scenario file's
// bytes in order, then the profile file's bytes, each preceded by its length —
// so a certificate names exactly what was run.
//
// Every field of weir.v1.Suite is applied; a field the file names that the
// schema does not know is an error (file:line:column). A suite's profile
// replaces every scenario's own profile (certify applies it to every run and
// its reports name it).
#pragma once

#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "absl/status/statusor.h"
#include "weir/v1/scenario.pb.h"
#include "weir/v1/suite.pb.h"

namespace weir {

struct LoadedSuite {
  v1::Suite suite;
  std::string path;
  std::string digest;                       // "sha256:…"
  std::vector<std::string> scenario_paths;  // resolved, as they open from here
  std::vector<v1::Scenario> scenarios;      // validated, defaults filled
  // The suite's `profile`, loaded and validated; unset: each scenario's own.
  std::optional<v1::Profile> profile;
  std::string profile_path;  // resolved, as it opens from here; empty when unset
  std::uint64_t pairs() const { return scenarios.size() * suite.seeds(); }
};

// Errors: file:line:column of the suite or of the scenario that is wrong.
[[nodiscard]] absl::StatusOr<LoadedSuite> LoadSuite(const std::string& path);
// Same, from the suite's text in memory; scenarios still open relative to
// `path`'s directory.
[[nodiscard]] absl::StatusOr<LoadedSuite> ParseSuite(const std::string& path, std::string_view text);

}  // namespace weir
