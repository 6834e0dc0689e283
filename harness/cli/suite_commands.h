// File: suite_commands.h
//
// The suite-level subcommands of `weir`: certify (run a suite, write reports
// and a certificate), verify (check a certificate against a binary), merge
// (combine shard reports) and keygen (a key pair to sign certificates with;
// docs/certificates.md). Exit codes: 0 passed / intact, 1 an invariant failed
// / not certified, 2 usage or input error, 3 harness fault, 4 interrupted.
#pragma once

#include <string>
#include <vector>

#include <CLI/CLI.hpp>

#include "harness/cli/command_flags.h"

namespace weir {

struct SuiteCommands {
  CLI::App* certify = nullptr;
  CLI::App* verify = nullptr;
  CLI::App* merge = nullptr;
  CLI::App* keygen = nullptr;
  // certify
  std::string suite;
  ConnectorFlags connector;  // --connector, the words after --, --transport
  unsigned jobs = 0;
  std::uint64_t max_failures = 0;
  std::string shard;
  std::uint32_t shard_count_for_index = 0;
  std::string json, junit, certificate, html;
  std::string progress = "auto";
  std::string profile;            // overrides the suite's and every scenario's profile
  bool require_coverage = false;  // an invariant not exercised fails certify (exit 5)
  std::string recheck;            // certify: N, all, none; empty: the sample rule
  std::string signing_key;        // certify, merge: sign the certificate
  // verify
  std::string cert_file;
  std::string connector_binary;
  std::string trusted_key;
  // keygen
  std::string key_out;
  bool key_force = false;
  // merge
  std::vector<std::string> reports;
};

// A flag validator: a whole number >= 0 in decimal digits (CLI11 would
// otherwise wrap "-4" around into a huge unsigned value).
inline CLI::Validator WholeNumber() {
  return CLI::Validator(
      [](std::string& text) -> std::string {
        if (text.empty() || text.find_first_not_of("0123456789") != std::string::npos) {
          return "'" + text + "' is not a whole number; expected decimal digits (0, 1, 2, …)";
        }
        return std::string();
      },
      "UINT", "WholeNumber");
}

void AddSuiteCommands(CLI::App& app, SuiteCommands& state);
// Runs whichever suite command was parsed; -1 when none was.
int RunSuiteCommand(SuiteCommands& state);

}  // namespace weir
