#include "harness/edge/private_dir.h"

#include <stdlib.h>
#include <sys/stat.h>

#include <cstring>
#include <filesystem>
#include <vector>

#include "absl/status/status.h"

namespace weir {

absl::StatusOr<std::unique_ptr<PrivateDir>> PrivateDir::Create() {
  const char* tmp = std::getenv("TMPDIR");
  std::string pattern = std::string(tmp != nullptr && *tmp != '\0' ? tmp : "/tmp") + "/weir-XXXXXX";
  std::vector<char> buf(pattern.begin(), pattern.end());
  buf.push_back('\0');
  if (::mkdtemp(buf.data()) == nullptr) {
    return absl::InternalError(std::string("cannot create a private directory: ") + std::strerror(errno));
  }
  ::chmod(buf.data(), 0700);
  return std::unique_ptr<PrivateDir>(new PrivateDir(buf.data()));
}

PrivateDir::~PrivateDir() {
  std::error_code ignored;
  std::filesystem::remove_all(path_, ignored);
}

}  // namespace weir
