// File: run_log.h
//
// The runs of a suite, kept on disk instead of in memory: certify appends each
// finished RunRecord here, in pair order, and the reports read them back one
// at a time, so a 10,000-run certify holds no more runs in memory than a
// 10-run one. Merge uses the same log for the runs it combines.
//
// The file is length-delimited binary Protobuf (a varint length, then a
// serialized RunRecord, repeated). It is created in a fresh private 0700
// directory under $TMPDIR (or /tmp) and unlinked at once, directory included:
// only this process's descriptor reaches it (opened close-on-exec, so no
// connector process inherits it), and nothing is left on disk on any exit
// path, a crash or SIGKILL included. Its space is freed when the log is
// destroyed.
//
// Example:
//   auto log = RunLog::Create();                 // StatusOr<unique_ptr<RunLog>>
//   for (const auto& run : finished) RETURN_IF_ERROR((*log)->Append(run));
//   RETURN_IF_ERROR((*log)->Finish());
//   auto reader = (*log)->Read();
//   v1::RunRecord run;
//   while (*reader->Next(&run)) …                // check the StatusOr first
//
// Thread safety: Append() and Finish() from one thread at a time (certify
// calls them under its lock). After Finish(), any number of readers, each
// used by one thread at a time, reading independently.
#pragma once

#include <cstdint>
#include <memory>
#include <string>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "weir/v1/suite.pb.h"

namespace google::protobuf::io {
class FileOutputStream;
}

namespace weir {

// Runs in pair order, one at a time, from a log or from a report in memory.
class RunReader {
 public:
  virtual ~RunReader() = default;
  // Replaces *run with the next run and returns true, or returns false at the
  // end. Error: DataLoss naming the record that could not be read.
  [[nodiscard]] virtual absl::StatusOr<bool> Next(v1::RunRecord* run) = 0;
};

class RunLog {
 public:
  // An empty log. Error: Internal naming the directory or file that could
  // not be created (and errno's text).
  [[nodiscard]] static absl::StatusOr<std::unique_ptr<RunLog>> Create();
  ~RunLog();
  RunLog(const RunLog&) = delete;
  RunLog& operator=(const RunLog&) = delete;

  // Appends one run. REQUIRES: Finish() not called. Error: Unavailable with
  // errno's text (disk full…); the log then refuses every further call.
  [[nodiscard]] absl::Status Append(const v1::RunRecord& run);
  // Writes out what is buffered; after it, the log only reads. Same errors.
  [[nodiscard]] absl::Status Finish();

  // Runs appended so far.
  std::uint64_t size() const { return size_; }
  // Bytes the runs take in the file (after Finish: the file's size).
  std::uint64_t bytes() const;

  // A reader from the first run. REQUIRES: Finish() returned OK; the reader
  // does not outlive the log.
  std::unique_ptr<RunReader> Read() const;

 private:
  explicit RunLog(int fd);

  const int fd_;
  std::unique_ptr<google::protobuf::io::FileOutputStream> out_;
  std::uint64_t size_ = 0;
  std::uint64_t finished_bytes_ = 0;
  bool finished_ = false;
  absl::Status status_;
};

// A reader over runs already in memory (a report parsed from JSON, a test's
// runs). REQUIRES: `runs` outlives the reader and does not change.
std::unique_ptr<RunReader> ReadRunsInMemory(const google::protobuf::RepeatedPtrField<v1::RunRecord>& runs);

}  // namespace weir
