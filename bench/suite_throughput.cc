// Suite throughput: seed-runs per second of one suite, in-process against over
// gRPC (a real connector process per run), measured in the same run so the
// ratio holds on a noisy machine.
//
// usage: suite_throughput SUITE CONNECTOR_BINARY [JOBS]
#include <chrono>
#include <cstdio>
#include <cstdlib>

#include "fixtures/connectors/reference_source.h"
#include "harness/inprocess/in_process_port.h"
#include "harness/suite/certify.h"
#include "harness/suite/suite_file.h"

int main(int argc, char** argv) {
  using namespace weir;
  if (argc < 3) {
    std::fprintf(stderr, "usage: %s SUITE CONNECTOR_BINARY [JOBS]\n", argv[0]);
    return 2;
  }
  const unsigned jobs = argc > 3 ? static_cast<unsigned>(std::atoi(argv[3])) : 2;
  auto suite = LoadSuite(argv[1]);
  if (!suite.ok()) {
    std::fprintf(stderr, "%s\n", std::string(suite.status().message()).c_str());
    return 2;
  }
  auto measure = [&](const char* name, CertifyOptions options) -> double {
    options.jobs = jobs;
    const auto start = std::chrono::steady_clock::now();
    auto result = Certify(*suite, options);
    const double wall = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
    if (!result.ok()) {
      std::fprintf(stderr, "%s: %s\n", name, std::string(result.status().message()).c_str());
      std::exit(3);
    }
    const auto runs = static_cast<unsigned long long>(result->tally.runs());
    const double rate = static_cast<double>(runs) / wall;
    std::printf("%-12s %6llu runs %6llu passed %9.2f s %10.1f runs/s %10.0f runs/min\n", name, runs,
                static_cast<unsigned long long>(result->tally.passed()), wall, rate, rate * 60);
    return rate;
  };
  std::printf("suite %s, %llu pairs, --jobs %u\n", argv[1], static_cast<unsigned long long>(suite->pairs()), jobs);
  CertifyOptions grpc;
  grpc.connector_argv = {argv[2]};
  const double over_grpc = measure("over gRPC", grpc);
  CertifyOptions in_process;
  in_process.connector_argv = {"(in-process)"};
  in_process.runner = [](const RunSpec& spec) {
    return RunInProcess(spec, [] { return std::make_unique<fixtures::ReferenceSource>(); });
  };
  const double inproc = measure("in-process", in_process);
  std::printf("in-process / gRPC = %.1fx (target: at least 20x)\n", inproc / over_grpc);
  return 0;
}
