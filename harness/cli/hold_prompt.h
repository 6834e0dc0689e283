// File: hold_prompt.h
//
// What `weir replay --stop-before K` shows and waits for while the rerun
// holds before event #K: the live connector processes (pid, whether it is
// alive at that moment, where it listens, where its broker calls go), the
// event that comes next, and a prompt. It then waits for one line on an input
// (Enter), its end (EOF: a closed or non-terminal stdin goes on at once) or
// the stop flag (a signal), whichever comes first. The only I/O of a hold:
// the runtime calls it through RunSpec::on_hold.
//
// Example:
//   options.on_hold = [&](const HoldPoint& at, const std::string& what, const std::string& line) {
//     PrintHold(stdout, at, what, line);
//     WaitForEnter(0, stop);
//   };
//
// Thread safety: none; the simulation thread calls it.
#pragma once

#include <atomic>
#include <cstdio>
#include <string>

#include "harness/run/run.h"

namespace weir {

// Writes the hold's description and the prompt to `out`, and flushes it.
void PrintHold(std::FILE* out, const HoldPoint& at, const std::string& next_what, const std::string& next_line);

enum class HoldEnd { kLine, kEndOfInput, kStopped };

// Reads from `fd` until a newline, the end of the input (EOF, or an fd that
// cannot be read) or `stop` (if given) becomes true, checked every 100 ms.
HoldEnd WaitForEnter(int fd, const std::atomic<bool>* stop);

}  // namespace weir
