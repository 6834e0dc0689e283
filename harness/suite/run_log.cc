#include "harness/suite/run_log.h"

#include <fcntl.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <cstring>

#include <google/protobuf/io/zero_copy_stream_impl.h>
#include <google/protobuf/util/delimited_message_util.h>

#include "absl/strings/str_cat.h"
#include "harness/edge/private_dir.h"

namespace weir {
namespace {

// Reads [0, end) of the log with pread, so every reader keeps its own offset
// on the one shared descriptor.
class PreadStream : public google::protobuf::io::CopyingInputStream {
 public:
  PreadStream(int fd, std::uint64_t end) : fd_(fd), end_(end) {}
  int Read(void* buffer, int size) override {
    const std::uint64_t want = std::min<std::uint64_t>(static_cast<std::uint64_t>(size), end_ - offset_);
    if (want == 0) return 0;
    ssize_t n;
    do {
      n = ::pread(fd_, buffer, want, static_cast<off_t>(offset_));
    } while (n < 0 && errno == EINTR);
    if (n > 0) offset_ += static_cast<std::uint64_t>(n);
    return static_cast<int>(n);
  }

 private:
  const int fd_;
  const std::uint64_t end_;
  std::uint64_t offset_ = 0;
};

class LogReader : public RunReader {
 public:
  LogReader(int fd, std::uint64_t end) : raw_(fd, end), in_(&raw_, 64 << 10) {}
  absl::StatusOr<bool> Next(v1::RunRecord* run) override {
    run->Clear();  // parsing merges into the message
    bool clean_eof = false;
    if (google::protobuf::util::ParseDelimitedFromZeroCopyStream(run, &in_, &clean_eof)) {
      ++read_;
      return true;
    }
    if (clean_eof) return false;
    return absl::DataLossError(absl::StrCat("run log: run ", read_ + 1, " cannot be read (damaged or cut short)"));
  }

 private:
  PreadStream raw_;
  google::protobuf::io::CopyingInputStreamAdaptor in_;
  std::uint64_t read_ = 0;
};

class MemoryReader : public RunReader {
 public:
  explicit MemoryReader(const google::protobuf::RepeatedPtrField<v1::RunRecord>& runs) : runs_(runs) {}
  absl::StatusOr<bool> Next(v1::RunRecord* run) override {
    if (next_ >= runs_.size()) return false;
    *run = runs_.Get(next_++);
    return true;
  }

 private:
  const google::protobuf::RepeatedPtrField<v1::RunRecord>& runs_;
  int next_ = 0;
};

}  // namespace

absl::StatusOr<std::unique_ptr<RunLog>> RunLog::Create() {
  auto dir = PrivateDir::Create();
  if (!dir.ok()) return absl::InternalError(absl::StrCat("run log: ", dir.status().message()));
  const std::string path = (*dir)->path() + "/runs.pb";
  const int fd = ::open(path.c_str(), O_RDWR | O_CREAT | O_EXCL | O_CLOEXEC, 0600);
  if (fd < 0) {
    return absl::InternalError(absl::StrCat("run log: cannot create ", path, ": ", std::strerror(errno)));
  }
  ::unlink(path.c_str());  // the directory goes with `dir`
  return std::unique_ptr<RunLog>(new RunLog(fd));
}

RunLog::RunLog(int fd) : fd_(fd), out_(std::make_unique<google::protobuf::io::FileOutputStream>(fd, 64 << 10)) {}

RunLog::~RunLog() {
  out_.reset();
  ::close(fd_);
}

absl::Status RunLog::Append(const v1::RunRecord& run) {
  if (!status_.ok()) return status_;
  if (!google::protobuf::util::SerializeDelimitedToZeroCopyStream(run, out_.get())) {
    status_ = absl::UnavailableError(
        absl::StrCat("run log: cannot write run ", size_ + 1, ": ", std::strerror(out_->GetErrno())));
    return status_;
  }
  ++size_;
  return absl::OkStatus();
}

absl::Status RunLog::Finish() {
  if (!status_.ok()) return status_;
  if (!out_->Flush()) {
    status_ = absl::UnavailableError(absl::StrCat("run log: cannot write: ", std::strerror(out_->GetErrno())));
    return status_;
  }
  finished_bytes_ = static_cast<std::uint64_t>(out_->ByteCount());
  finished_ = true;
  return absl::OkStatus();
}

std::uint64_t RunLog::bytes() const {
  return finished_ ? finished_bytes_ : static_cast<std::uint64_t>(out_->ByteCount());
}

std::unique_ptr<RunReader> RunLog::Read() const { return std::make_unique<LogReader>(fd_, finished_bytes_); }

std::unique_ptr<RunReader> ReadRunsInMemory(const google::protobuf::RepeatedPtrField<v1::RunRecord>& runs) {
  return std::make_unique<MemoryReader>(runs);
}

}  // namespace weir
