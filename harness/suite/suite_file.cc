#include "harness/suite/suite_file.h"

#include <algorithm>
#include <filesystem>

#include "absl/strings/str_cat.h"
#include "harness/scenario/profile_file.h"
#include "harness/scenario/scenario_file.h"
#include "harness/scenario/text_file.h"
#include "harness/trace/trace_format.h"

namespace weir {

absl::StatusOr<LoadedSuite> LoadSuite(const std::string& path) {
  std::string text;
  if (absl::Status st = ReadWholeFile(path, &text); !st.ok()) return st;
  return ParseSuite(path, text);
}

absl::StatusOr<LoadedSuite> ParseSuite(const std::string& path, std::string_view text) {
  LoadedSuite out;
  out.path = path;
  TextFile f(path);
  if (absl::Status st = f.ParseText(text, &out.suite); !st.ok()) return st;
  const v1::Suite& s = out.suite;
  f.Require(s.scenarios_size() > 0, {"scenarios"}, "expected at least one scenarios: \"FILE\"");
  f.Require(s.seeds() >= 1 && s.seeds() <= 1000000, {"seeds"},
            absl::StrCat("seeds is ", s.seeds(), "; expected 1 ..1000000"));
  if (absl::Status st = f.status(); !st.ok()) return st;
  if (out.suite.first_seed() == 0) out.suite.set_first_seed(1);

  Sha256 digest;
  auto feed = [&digest](std::string_view bytes) {
    digest.Update(absl::StrCat(bytes.size(), ":"));
    digest.Update(bytes);
  };
  feed(text);
  const std::filesystem::path base = std::filesystem::path(path).parent_path();
  // Where a quoted file name stands in the suite's text, for errors about it
  // (the text parser keeps one location per list, none per element).
  auto located = [&](const std::string& name, const std::string& field, const std::string& what) {
    const std::size_t at = text.find(absl::StrCat("\"", name, "\""));
    if (at == std::string::npos) {
      f.Require(false, {field}, what);
      return f.status();
    }
    const std::size_t line_start = text.rfind('\n', at);
    const std::size_t line =
        1 + static_cast<std::size_t>(std::count(text.begin(), text.begin() + static_cast<std::ptrdiff_t>(at), '\n'));
    const std::size_t column = line_start == std::string::npos ? at + 1 : at - line_start;
    return absl::InvalidArgumentError(absl::StrCat(path, ":", line, ":", column, ": ", what));
  };
  for (int i = 0; i < s.scenarios_size(); ++i) {
    const std::string resolved = (base / s.scenarios(i)).lexically_normal().string();
    std::string scenario_text;
    if (absl::Status st = ReadWholeFile(resolved, &scenario_text); !st.ok()) {
      return located(s.scenarios(i), absl::StrCat("scenarios[", i, "]"),
                     absl::StrCat("scenario '", s.scenarios(i), "' cannot be read (", st.message(), ")"));
    }
    auto scenario = ParseScenario(resolved, scenario_text);
    if (!scenario.ok()) return scenario.status();
    feed(scenario_text);
    out.scenario_paths.push_back(resolved);
    out.scenarios.push_back(std::move(*scenario));
  }
  if (!s.profile().empty()) {
    const std::string resolved = (base / s.profile()).lexically_normal().string();
    std::string profile_text;
    if (absl::Status st = ReadWholeFile(resolved, &profile_text); !st.ok()) {
      return located(s.profile(), "profile",
                     absl::StrCat("profile '", s.profile(), "' cannot be read (", st.message(), ")"));
    }
    auto profile = ParseProfile(resolved, profile_text);
    if (!profile.ok()) return profile.status();
    feed(profile_text);
    out.profile = std::move(*profile);
    out.profile_path = resolved;
  }
  out.digest = digest.HexDigest();
  return out;
}

}  // namespace weir
