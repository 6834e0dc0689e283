// File: first_failures.h
//
// Keeps the traces certify needs for its HTML report: for each invariant, the
// trace of the failing run that comes first in pair order (the run the
// summary names as its first failing seed). Every run writes its trace to
// PathFor(pair); Offer() then keeps the file only while it is the first
// failure of some invariant and deletes it otherwise. So at most one trace
// per invariant is on disk at any time (plus those of runs in flight), and
// nothing is held in memory but the file names: a 10,000-run certify keeps
// the same few files as a 10-run one.
//
// The directory belongs to the caller (a PrivateDir, removed with its files).
//
// Thread safety: Offer() and First() may be called from any thread.
#pragma once

#include <cstdint>
#include <map>
#include <mutex>
#include <string>

#include "weir/v1/suite.pb.h"

namespace weir {

class FirstFailureTraces {
 public:
  explicit FirstFailureTraces(std::string dir) : dir_(std::move(dir)) {}

  // Where the run of pair `pair_index` writes its trace.
  std::string PathFor(std::uint64_t pair_index) const;

  // Called once per finished run, after its trace was written (or not, for a
  // harness fault). Keeps or deletes the trace, and deletes traces that are no
  // longer the first failure of any invariant.
  void Offer(const v1::RunRecord& run);

  struct Kept {
    std::uint64_t pair_index = 0;
    std::string path;
    std::string scenario;
    std::uint64_t seed = 0;
    std::string replay;
  };
  // By invariant name: the first failing run's trace.
  std::map<std::string, Kept> First() const;

 private:
  bool Referenced(std::uint64_t pair_index) const;  // REQUIRES: mu_ held

  const std::string dir_;
  mutable std::mutex mu_;
  std::map<std::string, Kept> first_;
};

}  // namespace weir
