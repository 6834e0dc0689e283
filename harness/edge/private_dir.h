// File: private_dir.h
//
// A private temporary directory (mode 0700) for one run's Unix sockets,
// removed with everything in it when the object dies.
#pragma once

#include <memory>
#include <string>

#include "absl/status/statusor.h"

namespace weir {

class PrivateDir {
 public:
  // Creates $TMPDIR/weir-XXXXXX (or /tmp/…). Error: mkdtemp failed.
  [[nodiscard]] static absl::StatusOr<std::unique_ptr<PrivateDir>> Create();
  ~PrivateDir();
  PrivateDir(const PrivateDir&) = delete;
  PrivateDir& operator=(const PrivateDir&) = delete;

  const std::string& path() const { return path_; }

 private:
  explicit PrivateDir(std::string path) : path_(std::move(path)) {}
  std::string path_;
};

}  // namespace weir
