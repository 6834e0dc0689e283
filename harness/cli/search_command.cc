#include "harness/cli/search_command.h"

#include <unistd.h>

#include <chrono>
#include <cmath>
#include <cstdio>
#include <filesystem>

#include <google/protobuf/text_format.h>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/strings/str_join.h"
#include "harness/edge/command_line.h"
#include "harness/cli/stop_signal.h"
#include "harness/edge/grpc_run.h"
#include "harness/report/html_timeline.h"
#include "harness/report/markup_escape.h"
#include "harness/scenario/plan_file.h"
#include "harness/scenario/profile_file.h"
#include "harness/scenario/scenario_file.h"
#include "harness/scenario/text_file.h"
#include "harness/search/guided_search.h"
#include "harness/suite/certify.h"

namespace weir {
namespace {

// search's own words for the shared exit codes 0 and 1 (command_flags.h).
constexpr int kNothingFound = kExitPassed, kFound = kExitFailed;

int Usage(absl::string_view message) { return UsageError(message); }

// The scenario a candidate runs: the loaded one, with its swarm's fault kinds
// switched off.
v1::Scenario AsRun(const v1::Scenario& scenario, const SearchCandidate& c) {
  v1::Scenario s = scenario;
  SwitchOff(c.switched_off, s.mutable_faults());
  return s;
}

// A finding as one scenario file: the scenario as it ran, every drawn fault
// switched off and the failing plan as scripted decisions (applied in draw
// mode exactly as the plan is in plan mode), so `weir run --scenario F --seed
// S` and a suite naming it replay the failing run without a plan file.
v1::Scenario Replayable(const v1::Scenario& as_run, const v1::FaultPlan& plan) {
  v1::Scenario s = as_run;
  // Every fault the run applied is a decision of its plan — throttles drawn
  // from a token bucket or window too, and the many-reader cuts, moves and
  // membership changes — so nothing else may be drawn: a mutated plan may
  // lack a decision the rates would draw again at its place.
  s.mutable_faults()->Clear();
  if (s.has_readers()) {
    v1::Readers* r = s.mutable_readers();
    r->clear_cut_rate();
    r->clear_move_rate();
    r->clear_membership_rate();
    r->clear_cut_crash_rate();
    r->clear_move_crash_rate();
  }
  for (const auto& d : plan.decisions()) *s.mutable_faults()->add_scripted() = d;
  return s;
}

// The HTML page: features seen against runs (an SVG line), and the findings
// with their replay lines. Everything shown is escaped.
std::string SearchHtml(const SearchResult& r, const std::vector<std::string>& finding_lines, bool blind) {
  constexpr double kW = 640, kH = 240, kPad = 40;
  const std::size_t n = r.features_after_run.size();
  const std::size_t top = std::max<std::size_t>(1, n == 0 ? 1 : r.features_after_run.back());
  std::string points;
  for (std::size_t i = 0; i < n; ++i) {
    const double x = kPad + (kW - 2 * kPad) * (n == 1 ? 0.0 : static_cast<double>(i) / static_cast<double>(n - 1));
    const double y =
        kH - kPad - (kH - 2 * kPad) * static_cast<double>(r.features_after_run[i]) / static_cast<double>(top);
    absl::StrAppend(&points, i == 0 ? "" : " ", absl::StrFormat("%.1f,%.1f", x, y));
  }
  std::string body = absl::StrCat(
      "<h1>weir search</h1>\n<p>", r.runs, " runs (", blind ? "blind seeds" : "guided by coverage", "), ", r.features,
      " features seen, corpus of ", r.corpus, " plans, ", r.findings.size(), " finding(s).</p>\n",
      "<svg class=\"coverage\" width=\"", kW, "\" height=\"", kH, "\" viewBox=\"0 0 ", kW, " ", kH,
      "\" xmlns=\"http://www.w3.org/2000/svg\" role=\"img\"><title>features seen against runs</title>", "<line x1=\"",
      kPad, "\" y1=\"", kH - kPad, "\" x2=\"", kW - kPad, "\" y2=\"", kH - kPad, "\" stroke=\"#888\"/><line x1=\"",
      kPad, "\" y1=\"", kPad, "\" x2=\"", kPad, "\" y2=\"", kH - kPad, "\" stroke=\"#888\"/><text x=\"", kW / 2,
      "\" y=\"", kH - 8, "\" text-anchor=\"middle\">runs (", n, ")</text><text x=\"8\" y=\"", kPad - 10,
      "\">features (", top, ")</text>", "<polyline fill=\"none\" stroke=\"#07a\" stroke-width=\"2\" points=\"", points,
      "\"/></svg>\n");
  if (!finding_lines.empty()) {
    body += "<h2>Findings</h2>\n<ul>\n";
    for (const std::string& line : finding_lines)
      absl::StrAppend(&body, "<li><code>", EscapeMarkup(line), "</code></li>\n");
    body += "</ul>\n";
  }
  return HtmlPage("weir search", body);
}

}  // namespace

void AddSearchCommand(CLI::App& app, SearchFlags& f) {
  // An unsigned option would take "-1" as 2^64 - 1 (a budget without end).
  const CLI::Validator kNotNegative(
      [](std::string& text) {
        return text.find('-') != std::string::npos ? "is " + text + "; expected a whole number >= 0" : std::string();
      },
      "N>=0");
  CLI::App* c = app.add_subcommand(
      "search", "Spend a budget of runs looking for a failure, guided by coverage (or --blind seeds)");
  f.command = c;
  c->add_option("--scenario", f.scenarios, "Scenario file (repeat for several), or a bundled scenario's name")
      ->required();
  AddConnectorFlags(*c, f.connector, "Connector command 'CMD ARGS…' (no shell)");
  c->add_option("--profile", f.profile, "Profile file overriding every scenario's (the connector's claim)");
  c->add_option("--budget", f.budget, "Runs to spend at most (default 200)")->check(kNotNegative);
  c->add_option("--search-seed", f.search_seed, "Seed of the search's own choices (default 1)")->check(kNotNegative);
  c->add_option("--first-seed", f.first_seed, "First run seed drawn (default 1)")->check(kNotNegative);
  c->add_flag("--blind", f.blind, "Blind seeds with every fault kind on (the baseline), no feedback");
  c->add_flag("--collect", f.collect, "Go on after the first failure: one finding per distinct set of failures");
  c->add_option("--out", f.out, "Directory for the findings (default weir-search)");
  c->add_option("--coverage", f.coverage, "Write the features seen after each run here (one count per line)");
  c->add_option("--html", f.html, "Write an HTML page here: coverage against runs, and the findings");
  c->add_option("--max-seconds", f.max_seconds, "Start no run after this much wall time (default 600; 0: no limit)");
  c->add_option("--progress", f.progress, "auto (one updating line on a terminal), lines or none");
}

int RunSearchCommand(SearchFlags& f) {
  if (f.command == nullptr || !f.command->parsed()) return -1;
  auto connector = ParseConnectorFlags(f.connector, ConnectorNeed::kRequired);
  if (!connector.ok()) return UsageError(connector.status().message());
  const Transport transport = connector->transport;
  const std::vector<std::string> argv = connector->argv;
  if (f.progress != "auto" && f.progress != "lines" && f.progress != "none") {
    return Usage("--progress is '" + f.progress + "'; expected auto, lines or none");
  }
  if (f.budget == 0) return Usage("--budget is 0; expected at least one run");
  if (!std::isfinite(f.max_seconds) || f.max_seconds < 0) {
    return Usage(absl::StrCat("--max-seconds is ", f.max_seconds, "; expected a number of seconds >= 0 (0: no limit)"));
  }
  if (f.out.empty()) return Usage("--out is empty; expected a directory for the findings");
  if (absl::Status st = CheckOutputPaths({{"--coverage", f.coverage}, {"--html", f.html}}); !st.ok()) {
    return UsageError(st.message());
  }
  std::optional<v1::Profile> profile;
  if (!f.profile.empty()) {
    auto p = LoadProfile(f.profile);
    if (!p.ok()) {
      std::fprintf(stderr, "%s\n", std::string(p.status().message()).c_str());
      return kExitUsage;
    }
    profile = std::move(*p);
  }
  std::vector<v1::Scenario> scenarios;
  SearchOptions options;
  for (const std::string& path : f.scenarios) {
    auto s = LoadScenario(path);
    if (!s.ok()) {
      std::fprintf(stderr, "%s\n", std::string(s.status().message()).c_str());
      return kExitUsage;
    }
    if (profile.has_value()) *s->mutable_profile() = *profile;
    options.scenarios.push_back(SearchScenario{RatesOn(s->faults())});
    scenarios.push_back(std::move(*s));
  }
  std::error_code ec;
  std::filesystem::create_directories(f.out, ec);
  if (ec || !std::filesystem::is_directory(f.out)) {
    return Usage(absl::StrCat("--out: cannot create directory '", f.out, "': ", ec.message()));
  }

  const std::atomic<bool>* stop = InstallStopSignals();
  const auto start = std::chrono::steady_clock::now();
  const auto elapsed = [&] { return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count(); };
  options.budget = f.budget;
  options.seed = f.search_seed;
  options.first_seed = f.first_seed;
  options.blind = f.blind;
  options.collect = f.collect;
  bool out_of_time = false;  // --max-seconds ended the search before its budget
  options.stop = [&] {
    if (stop->load()) return true;
    if (f.max_seconds > 0 && elapsed() >= f.max_seconds) out_of_time = true;
    return out_of_time;
  };
  const bool tty = f.progress == "auto" && ::isatty(STDOUT_FILENO);
  std::size_t findings_shown = 0;  // lines mode: a line for each new finding, not every run after one
  options.progress = [&](const SearchProgress& p) {
    if (f.progress == "none") return;
    if (tty) {
      std::printf("\rsearch: %llu/%llu runs, %zu features, corpus %zu, %zu failure(s) ",
                  static_cast<unsigned long long>(p.runs), static_cast<unsigned long long>(f.budget), p.features,
                  p.corpus, p.findings);
    } else if (p.runs % 10 == 0 || p.findings > findings_shown) {
      findings_shown = p.findings;
      std::printf("search: %llu/%llu runs, %zu features, corpus %zu, %zu failure(s)\n",
                  static_cast<unsigned long long>(p.runs), static_cast<unsigned long long>(f.budget), p.features,
                  p.corpus, p.findings);
    }
    std::fflush(stdout);
  };

  std::printf("weir search: %zu scenario(s), budget %llu runs, %s, connector %s\n", scenarios.size(),
              static_cast<unsigned long long>(f.budget), f.blind ? "blind seeds" : "guided by coverage",
              ShellJoin(argv).c_str());
  std::fflush(stdout);
  auto result = GuidedSearch(options, [&](const SearchCandidate& c) -> absl::StatusOr<SearchFeedback> {
    RunSpec spec;
    spec.scenario = AsRun(scenarios[c.scenario], c);
    spec.scenario_path = f.scenarios[c.scenario];
    spec.seed = c.seed;
    spec.connector_argv = argv;
    spec.transport = transport;
    spec.plan = c.plan;
    spec.stop = stop;
    auto out = RunOverGrpc(spec);
    if (!out.ok()) return out.status();
    return SearchFeedback{FailedByCause(out->verdict), FeaturesOf(out->verdict), out->plan};
  });
  if (tty) std::printf("\n");
  if (stop->load()) {
    std::fprintf(stderr, "weir: interrupted by signal %d: the connector was killed\n", StopSignal());
    return kExitInterrupted;
  }
  if (!result.ok()) {
    std::fprintf(stderr, "weir: harness fault: %s\n", std::string(result.status().message()).c_str());
    return kExitHarness;
  }
  if (!f.coverage.empty()) {
    std::string text;
    for (std::size_t n : result->features_after_run) absl::StrAppend(&text, n, "\n");
    if (absl::Status st = WriteFileAtomically(f.coverage, text); !st.ok()) {
      std::fprintf(stderr, "weir: %s\n", std::string(st.message()).c_str());
      return kExitHarness;
    }
  }
  std::printf("%llu runs, %zu features seen, corpus of %zu plans, %.1f s\n",
              static_cast<unsigned long long>(result->runs), result->features, result->corpus, elapsed());
  std::vector<std::string> finding_lines;
  const auto write_html = [&]() -> bool {
    if (f.html.empty()) return true;
    if (absl::Status st = WriteFileAtomically(f.html, SearchHtml(*result, finding_lines, f.blind)); !st.ok()) {
      std::fprintf(stderr, "weir: %s\n", std::string(st.message()).c_str());
      return false;
    }
    return true;
  };
  if (result->findings.empty()) {
    if (result->runs >= f.budget) {
      std::printf("no failure found within the budget.\n");
    } else if (out_of_time) {
      std::printf("no failure found: --max-seconds (%g s) ran out after %llu of the budget's %llu runs.\n",
                  f.max_seconds, static_cast<unsigned long long>(result->runs),
                  static_cast<unsigned long long>(f.budget));
    } else {
      std::printf(
          "no failure found: the search ran out of untried candidates after %llu of the budget's %llu "
          "runs.\n",
          static_cast<unsigned long long>(result->runs), static_cast<unsigned long long>(f.budget));
    }
    return write_html() ? kNothingFound : kExitHarness;
  }
  int k = 0;
  for (const SearchFinding& found : result->findings) {
    ++k;
    const v1::Scenario as_run = AsRun(scenarios[found.candidate.scenario], found.candidate);
    const v1::Scenario replayable = Replayable(as_run, *found.candidate.plan);
    const std::string base = absl::StrCat(f.out, "/find-", k);
    std::string scenario_text;
    google::protobuf::TextFormat::PrintToString(replayable, &scenario_text);
    scenario_text =
        absl::StrCat("# Found by weir search (run ", found.run, ") from ", f.scenarios[found.candidate.scenario],
                     ", seed ", found.candidate.seed, ": fails ", InvariantNames(found.failed),
                     ".\n# Drawn faults are off; the failing run's fault plan is scripted below.\n", scenario_text);
    const std::string suite_text = absl::StrCat(
        "# Regression suite for find-", k, " (weir search): fails ", InvariantNames(found.failed), ".\nname: \"find-",
        k, "\"\nscenarios: [\"find-", k, ".scenario\"]\nseeds: 1\nfirst_seed: ", found.candidate.seed, "\n");
    for (const auto& [path, text] :
         {std::pair{base + ".scenario", scenario_text}, std::pair{base + ".suite", suite_text},
          std::pair{base + ".plan",
                    FormatFaultPlan(*found.candidate.plan,
                                    absl::StrCat("found by weir search: fails ", InvariantNames(found.failed)))}}) {
      if (absl::Status st = WriteFileAtomically(path, text); !st.ok()) {
        std::fprintf(stderr, "weir: %s\n", std::string(st.message()).c_str());
        return kExitHarness;
      }
    }
    std::printf("\nFOUND %s at run %llu (%s, seed %llu, %d fault decisions)\n  files:   %s.{scenario,plan,suite}\n",
                InvariantNames(found.failed).c_str(), static_cast<unsigned long long>(found.run),
                f.scenarios[found.candidate.scenario].c_str(), static_cast<unsigned long long>(found.candidate.seed),
                found.candidate.plan->decisions_size(), base.c_str());
    const std::string replay = ReplayLine(base + ".scenario", found.candidate.seed, transport, "", "", argv);
    finding_lines.push_back(absl::StrCat(InvariantNames(found.failed), " at run ", found.run, ": ", replay));
    std::printf("  replay:  %s\n", replay.c_str());
    std::printf("  certify: %s certify --suite %s --connector %s\n", WeirProgram().c_str(),
                ShellQuote(base + ".suite").c_str(), ShellQuote(ShellJoin(argv)).c_str());
  }
  return write_html() ? kFound : kExitHarness;
}

}  // namespace weir
