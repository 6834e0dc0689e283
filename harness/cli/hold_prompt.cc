#include "harness/cli/hold_prompt.h"

#include <poll.h>
#include <signal.h>
#include <unistd.h>

#include <cerrno>

namespace weir {

void PrintHold(std::FILE* out, const HoldPoint& at, const std::string& next_what, const std::string& next_line) {
  std::fprintf(out, "weir replay: holding before event #%llu (events #0 to #%llu happened)\n",
               static_cast<unsigned long long>(at.next_seq), static_cast<unsigned long long>(at.next_seq - 1));
  if (at.processes.empty()) {
    std::fprintf(out, "  no connector process is alive here (between a crash and the next start)\n");
  }
  for (const HeldProcess& p : at.processes) {
    const bool alive = ::kill(static_cast<pid_t>(p.pid), 0) == 0;
    std::fprintf(out, "  reader %u: pid %lld (%s), listening on %s, broker calls to %s\n", p.reader,
                 static_cast<long long>(p.pid), alive ? "alive" : "not alive",
                 p.connector_address.empty() ? "(not yet known)" : p.connector_address.c_str(),
                 p.broker_address.c_str());
  }
  std::fprintf(out, "  next: #%llu %s\n        %s\n", static_cast<unsigned long long>(at.next_seq), next_what.c_str(),
               next_line.c_str());
  std::fprintf(out,
               "  attach a debugger now (gdb -p PID); weir waits for Enter (end of input or "
               "Ctrl-C also end the wait)\n");
  std::fflush(out);
}

HoldEnd WaitForEnter(int fd, const std::atomic<bool>* stop) {
  if (fd < 0) return HoldEnd::kEndOfInput;  // poll would skip it and wait for ever
  for (;;) {
    if (stop != nullptr && stop->load()) return HoldEnd::kStopped;
    pollfd p{fd, POLLIN, 0};
    const int r = ::poll(&p, 1, 100);
    if (r < 0) {
      if (errno == EINTR) continue;
      return HoldEnd::kEndOfInput;
    }
    if (r == 0) continue;
    if ((p.revents & POLLNVAL) != 0) return HoldEnd::kEndOfInput;
    char c = 0;
    const ssize_t n = ::read(fd, &c, 1);
    if (n == 0) return HoldEnd::kEndOfInput;
    if (n < 0) {
      if (errno == EINTR || errno == EAGAIN) continue;
      return HoldEnd::kEndOfInput;
    }
    if (c == '\n') return HoldEnd::kLine;
  }
}

}  // namespace weir
