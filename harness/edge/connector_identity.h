// File: connector_identity.h
//
// Which program a connector command meant when a run was recorded, and how to
// start that same program again from any directory.
//
// At record time IdentifyConnector pins the command down: the working
// directory, argv[0] resolved to an absolute path with the SHA-256 of its
// bytes, and the first later argument that names an existing regular file
// (the script of an interpreter such as `/usr/bin/python3 source.py`, or a
// connector's configuration file) likewise. The trace header keeps that next
// to the command as given (v1::ConnectorIdentity, proto/weir/v1/trace.proto).
//
// At replay time ResolveRecordedConnector starts from the header: argv[0]
// becomes the recorded absolute executable and the file argument its recorded
// absolute path, so `weir replay` and `weir shrink` work from any directory.
// It checks the program can be started at all, and compares the files' hashes
// with the recorded ones, so a rerun under a rebuilt or replaced connector is
// reported as such and never as a nondeterministic connector.
//
// Example:
//   auto id = IdentifyConnector(argv);                 // before weir run
//   *header.mutable_connector() = *id;
//   auto c = ResolveRecordedConnector(header, {});     // weir replay
//   if (!c.ok()) { /* cannot start: c.status().message() says why */ }
//   for (const auto& line : c->changes) print(line);   // before any verdict
//
// Thread safety: free functions over the file system; no shared state.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "weir/v1/trace.pb.h"

namespace weir {

// "sha256:<64 hex>" of a file's bytes. Error: NotFound when it cannot be
// opened, Unavailable when reading fails.
[[nodiscard]] absl::StatusOr<std::string> FileSha256(const std::string& path);

// Where posix_spawnp would find `program` (a path with '/' relative to the
// current directory, or a PATH search), as an absolute path; nullopt when it
// is not an executable file.
std::optional<std::string> FindExecutableAbsolute(const std::string& program);

// Record time, in the directory the command was given in.
// REQUIRES: argv is not empty.
// Error: NotFound when argv[0] is not an executable file (nor on PATH);
// NotFound/Unavailable when a file cannot be read for its hash.
[[nodiscard]] absl::StatusOr<v1::ConnectorIdentity> IdentifyConnector(const std::vector<std::string>& argv);

struct ResolvedConnector {
  // What to start now.
  std::vector<std::string> argv;
  // One line per file that differs from the recorded one, e.g. "the connector
  // binary changed since this trace was recorded: sha256 … then, … now".
  // Empty when the trace recorded no hashes, or every hash is the same.
  std::vector<std::string> changes;
  bool changed() const { return !changes.empty(); }
};

// Replay time. With `override_argv` (the user's --connector), that command as
// given, resolved against the current directory; otherwise the header's
// command with argv[0] and the file argument replaced by their recorded
// absolute paths (a trace without ConnectorIdentity: the command as given).
// Either way the hashes are compared with the recorded ones when both exist.
// Error: FailedPrecondition "the connector cannot start: …" naming what is
// missing (the executable, or the file argument) and what was recorded.
[[nodiscard]] absl::StatusOr<ResolvedConnector> ResolveRecordedConnector(const v1::TraceHeader& header,
                                                                         const std::vector<std::string>& override_argv);

}  // namespace weir
