// File: in_process_port.h
//
// Runs a C++ connector's Source class inside weir's process: no gRPC, no child
// process. Each incarnation is a fresh Source from the factory (as a new
// process would be); Kill() destroys it. Broker calls go straight to the
// simulation's broker endpoint on the calling thread, so the trace, the oracle
// and the reports are exactly those of a run over gRPC.
//
// A crash point inside a call cannot preempt the source's code: once the
// runtime's crash gate fires, every further broker call of that source fails
// with UNAVAILABLE, and when the call returns its answer is thrown away and the
// instance destroyed — which is what the connector would see if it had died.
//
// Example (in a connector's GoogleTest):
//   InProcessPort::Factory make = [] { return std::make_unique<MySource>(); };
//   auto report = CertifyInProcess("fixtures/suites/quick.suite", make);
//   EXPECT_EQ(report->runs_size(), report->pairs_total());
//
// Many readers: one port per reader, each with its own Source per incarnation
// from the same factory (the source learns its index from OpenInfo::reader);
// MakeInProcessPorts makes them.
//
// Thread safety: one simulation thread per port.
#pragma once

#include <functional>
#include <memory>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "harness/run/run.h"
#include "harness/runtime/connector_port.h"
#include "weir/adapter/source.h"
#include "weir/v1/suite.pb.h"

namespace weir {

class InProcessPort : public ConnectorPort {
 public:
  using Factory = std::function<std::unique_ptr<adapter::Source>()>;
  explicit InProcessPort(Factory factory) : factory_(std::move(factory)) {}

  ConnectorFailure Start(std::uint64_t incarnation) override;
  ConnectorFailure Open(const v1::OpenRequest& request, v1::OpenResponse* response, BrokerEndpoint& broker) override;
  ConnectorFailure Advance(const v1::AdvanceRequest& request, v1::AdvanceResponse* response,
                           BrokerEndpoint& broker) override;
  ConnectorFailure Checkpoint(const v1::CheckpointRequest& request, v1::CheckpointResponse* response,
                              BrokerEndpoint& broker) override;
  ConnectorFailure Committed(const v1::CommittedRequest& request, v1::CommittedResponse* response,
                             BrokerEndpoint& broker) override;
  ConnectorFailure Assign(const v1::AssignRequest& request, v1::AssignResponse* response,
                          BrokerEndpoint& broker) override;
  ConnectorFailure Revoke(const v1::RevokeRequest& request, v1::RevokeResponse* response,
                          BrokerEndpoint& broker) override;
  ConnectorFailure Cut(const v1::CutRequest& request, v1::CutResponse* response, BrokerEndpoint& broker) override;
  void Kill() override { source_.reset(); }

 private:
  Factory factory_;
  std::unique_ptr<adapter::Source> source_;
  adapter::SpansTold told_;  // many readers: the spans the source holds, for Cut
};

// One port per reader slot (ReaderCount in harness/run/run.h), each making
// its sources from `factory`.
[[nodiscard]] std::vector<std::unique_ptr<InProcessPort>> MakeInProcessPorts(const InProcessPort::Factory& factory,
                                                                             std::uint32_t readers);

// One run of (scenario, seed) against a fresh Source per incarnation of each
// reader.
[[nodiscard]] absl::StatusOr<RunOutput> RunInProcess(const RunSpec& spec, const InProcessPort::Factory& factory);

// A whole suite in-process, `jobs` runs at a time (each with its own sources),
// as one report in memory. For a suite of many thousand runs, call Certify()
// with a runner that calls RunInProcess and write the reports from its run log
// (bench/certify_memory.cc does), so memory stays flat.
[[nodiscard]] absl::StatusOr<v1::SuiteReport> CertifyInProcess(const std::string& suite_path,
                                                               const InProcessPort::Factory& factory,
                                                               unsigned jobs = 1);

}  // namespace weir
