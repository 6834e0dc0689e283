#include "harness/edge/connector_identity.h"

#include <unistd.h>

#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <system_error>

#include "absl/status/status.h"
#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "harness/edge/command_line.h"
#include "harness/trace/trace_format.h"

namespace weir {
namespace {

namespace fs = std::filesystem;

std::string Absolute(const std::string& path) {
  std::error_code ec;
  fs::path p = fs::absolute(path, ec);
  if (ec) return path;
  return p.lexically_normal().string();
}

bool IsExecutableFile(const std::string& path) {
  std::error_code ec;
  return fs::is_regular_file(path, ec) && ::access(path.c_str(), X_OK) == 0;
}

bool IsRegularFile(const std::string& path) {
  std::error_code ec;
  return fs::is_regular_file(path, ec);
}

// "sha256:abc…" → "abc…", for "sha256 … then, … now".
std::string Hex(const std::string& digest) { return absl::StartsWith(digest, "sha256:") ? digest.substr(7) : digest; }

// Why `path` cannot be started, for a FailedPrecondition message.
std::string Missing(const std::string& path) {
  std::error_code ec;
  if (!fs::exists(path, ec)) return "no longer exists";
  if (fs::is_directory(path, ec)) return "is a directory";
  return "is not an executable file";
}

std::string Recorded(const std::string& as_given, const v1::ConnectorIdentity& id) {
  return absl::StrCat("recorded as '", as_given, "' in ", id.working_directory());
}

void CompareHash(const std::string& what, const std::string& path, const std::string& recorded,
                 std::vector<std::string>* changes) {
  if (recorded.empty()) return;
  auto now = FileSha256(path);
  if (!now.ok()) return;  // unreadable: the start itself will say more
  if (*now == recorded) return;
  changes->push_back(absl::StrCat("the connector ", what, " changed since this trace was recorded: sha256 ",
                                  Hex(recorded), " then, ", Hex(*now), " now (", path, ")"));
}

}  // namespace

absl::StatusOr<std::string> FileSha256(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) return absl::NotFoundError(absl::StrCat(path, ": cannot open"));
  Sha256 h;
  std::string buf(1 << 16, '\0');
  while (in) {
    in.read(buf.data(), static_cast<std::streamsize>(buf.size()));
    h.Update(std::string_view(buf.data(), static_cast<std::size_t>(in.gcount())));
  }
  if (in.bad()) return absl::UnavailableError(absl::StrCat(path, ": reading failed"));
  return h.HexDigest();
}

std::optional<std::string> FindExecutableAbsolute(const std::string& program) {
  auto found = SearchPath(program, [](const std::string& file) { return IsExecutableFile(file); });
  if (!found.has_value()) return std::nullopt;
  return Absolute(*found);
}

absl::StatusOr<v1::ConnectorIdentity> IdentifyConnector(const std::vector<std::string>& argv) {
  if (argv.empty()) return absl::InvalidArgumentError("no connector command");
  v1::ConnectorIdentity id;
  std::error_code ec;
  const fs::path cwd = fs::current_path(ec);
  if (ec) return absl::UnavailableError(absl::StrCat("cannot read the working directory: ", ec.message()));
  id.set_working_directory(cwd.string());
  const auto exe = FindExecutableAbsolute(argv[0]);
  if (!exe.has_value()) {
    return absl::NotFoundError(absl::StrCat("'", argv[0], "' is not an executable file (nor found on PATH)"));
  }
  id.set_executable(*exe);
  auto sha = FileSha256(*exe);
  if (!sha.ok()) return sha.status();
  id.set_executable_sha256(*sha);
  for (std::size_t i = 1; i < argv.size(); ++i) {
    if (argv[i].empty() || !IsRegularFile(argv[i])) continue;
    auto file_sha = FileSha256(argv[i]);
    if (!file_sha.ok()) continue;  // unreadable: not the program's file
    id.set_file_argument_index(static_cast<std::uint32_t>(i));
    id.set_file_argument(Absolute(argv[i]));
    id.set_file_argument_sha256(*file_sha);
    break;
  }
  return id;
}

absl::StatusOr<ResolvedConnector> ResolveRecordedConnector(const v1::TraceHeader& header,
                                                           const std::vector<std::string>& override_argv) {
  ResolvedConnector out;
  const v1::ConnectorIdentity& recorded = header.connector();
  if (!override_argv.empty()) {
    out.argv = override_argv;
    const auto exe = FindExecutableAbsolute(out.argv[0]);
    if (!exe.has_value()) {
      return absl::FailedPreconditionError(absl::StrCat("the connector cannot start: '", out.argv[0],
                                                        "' is not an executable file (nor found on PATH)"));
    }
    // The same rule as at record time picks the file argument to compare.
    auto now = IdentifyConnector(out.argv);
    if (now.ok()) {
      CompareHash("binary", now->executable(), recorded.executable_sha256(), &out.changes);
      if (recorded.file_argument_index() > 0 && now->file_argument_index() > 0) {
        CompareHash("file argument", now->file_argument(), recorded.file_argument_sha256(), &out.changes);
      }
    }
    return out;
  }

  out.argv.assign(header.connector_argv().begin(), header.connector_argv().end());
  if (out.argv.empty()) {
    return absl::FailedPreconditionError(
        "the connector cannot start: the trace names no connector command; give --connector 'CMD ARGS…'");
  }
  if (recorded.executable().empty()) {
    // Written before traces recorded where the connector was: as given.
    if (!FindExecutableAbsolute(out.argv[0]).has_value()) {
      return absl::FailedPreconditionError(
          absl::StrCat("the connector cannot start: '", out.argv[0],
                       "' is not an executable file here (nor found on PATH), and the trace does not say which "
                       "directory it was recorded in; give --connector 'CMD ARGS…'"));
    }
    return out;
  }
  const std::string as_given = out.argv[0];
  out.argv[0] = recorded.executable();
  if (!IsExecutableFile(out.argv[0])) {
    return absl::FailedPreconditionError(absl::StrCat("the connector cannot start: '", out.argv[0], "' (",
                                                      Recorded(as_given, recorded), ") ", Missing(out.argv[0]),
                                                      "; give --connector 'CMD ARGS…' to name it"));
  }
  CompareHash("binary", out.argv[0], recorded.executable_sha256(), &out.changes);
  const std::size_t i = recorded.file_argument_index();
  if (i > 0 && i < out.argv.size() && !recorded.file_argument().empty()) {
    const std::string file_as_given = out.argv[i];
    out.argv[i] = recorded.file_argument();
    if (!IsRegularFile(out.argv[i])) {
      return absl::FailedPreconditionError(absl::StrCat("the connector cannot start: its file argument '", out.argv[i],
                                                        "' (", Recorded(file_as_given, recorded),
                                                        ") no longer exists; give --connector 'CMD ARGS…'"));
    }
    CompareHash("file argument", out.argv[i], recorded.file_argument_sha256(), &out.changes);
  }
  return out;
}

}  // namespace weir
