// File: trace_fuzz.cc
//
// libFuzzer target for the trace reader (`weir replay` / `weir explain`
// input). The reader opens files, so each input is written to one private
// temporary file first. Contract checked: the reader returns (no crash, no
// sanitizer report), and every error is InvalidArgument naming "path:line: ".
#include <unistd.h>

#include <cstddef>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <string>

#include "absl/strings/match.h"
#include "harness/replay/trace_reader.h"

namespace {

const std::string& InputPath() {
  static const std::string path = [] {
    char name[] = "/tmp/weir-trace-fuzz-XXXXXX";
    const int fd = mkstemp(name);
    if (fd < 0) std::abort();
    close(fd);
    return std::string(name);
  }();
  return path;
}

void Fail(const absl::Status& st) {
  if (st.code() == absl::StatusCode::kInvalidArgument && absl::StartsWith(st.message(), InputPath() + ":")) {
    return;
  }
  std::fprintf(stderr, "error without a location or of the wrong kind: %s\n", st.ToString().c_str());
  std::abort();
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string& path = InputPath();
  std::FILE* f = std::fopen(path.c_str(), "wb");
  if (f == nullptr) std::abort();
  if (size > 0 && std::fwrite(data, 1, size, f) != size) std::abort();
  std::fclose(f);

  auto reader = weir::TraceReader::Open(path);
  if (!reader.ok()) {
    Fail(reader.status());
    return 0;
  }
  while (true) {
    auto next = (*reader)->Next();
    if (!next.ok()) {
      Fail(next.status());
      break;
    }
    if (!*next) break;
  }
  return 0;
}
