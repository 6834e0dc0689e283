// Package weirtest certifies a Go connector from its own go test: it builds
// the connector's main package, runs `weir certify` on a suite (the bundled
// quick suite by default) and fails the test with the replay line of the
// first failing run, the one command that reruns it exactly.
//
//	func TestCertified(t *testing.T) {
//		weirtest.Certify(t, weirtest.Options{Package: "example/buoys/cmd/buoys"})
//	}
//
// weir is found through Options.Weir, else the WEIR environment variable,
// else `weir` on PATH; a test without it is skipped, not failed, so that a
// machine without weir can still run the connector's other tests (set
// WEIR_REQUIRED=1 to fail instead).
package weirtest

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"testing"
	"time"
)

// Options says what to certify and how.
type Options struct {
	// Package is the import path (or ./directory) of the connector's main
	// package, built with `go build`. Or set Binary.
	Package string
	// Binary is an already built connector, used instead of Package.
	Binary string
	// Args are extra words of the connector's command line.
	Args []string
	// Suite is a suite file or a bundled suite's name; default "quick".
	Suite string
	// Weir is the weir command; default $WEIR, else weir on PATH.
	Weir string
	// Jobs is how many runs at a time; default 2.
	Jobs int
	// MaxFailures, when > 0, stops launching runs after that many failed.
	MaxFailures int
	// Timeout bounds the build and the certification together; default 10 minutes.
	Timeout time.Duration
}

// Run is one run of a report.
type Run struct {
	Scenario         string   `json:"scenario"`
	Seed             string   `json:"seed"`
	Passed           bool     `json:"passed"`
	FailedInvariants []string `json:"failed_invariants"`
	FirstViolation   string   `json:"first_violation"`
	Digest           string   `json:"digest"`
	Replay           string   `json:"replay"`
	HarnessError     string   `json:"harness_error"`
}

// Report is what `weir certify` reported (the part weirtest reads of its
// JSON report).
type Report struct {
	SuiteName string `json:"suite_name"`
	Runs      []Run  `json:"runs"`
	// ExitCode is weir's: 0 every invariant held, 1 an invariant failed,
	// 2 usage or input error, 3 harness fault.
	ExitCode int `json:"-"`
	// Output is what weir printed.
	Output string `json:"-"`
}

// FirstFailure returns the first run that did not pass, or nil.
func (r *Report) FirstFailure() *Run {
	for i := range r.Runs {
		if !r.Runs[i].Passed {
			return &r.Runs[i]
		}
	}
	return nil
}

// ErrNoWeir is returned by Certify's helpers when no weir command is found.
var ErrNoWeir = errors.New("weirtest: no weir command (set Options.Weir or WEIR, or put weir on PATH)")

func findWeir(o Options) (string, error) {
	if o.Weir != "" {
		return o.Weir, nil
	}
	if w := os.Getenv("WEIR"); w != "" {
		return w, nil
	}
	if w, err := exec.LookPath("weir"); err == nil {
		return w, nil
	}
	return "", ErrNoWeir
}

func goCommand() string {
	if g, err := exec.LookPath("go"); err == nil {
		return g
	}
	return filepath.Join(runtime.GOROOT(), "bin", "go")
}

// Build builds the connector's main package into dir and returns its path.
func Build(ctx context.Context, pkg, dir string) (string, error) {
	out := filepath.Join(dir, "connector")
	cmd := exec.CommandContext(ctx, goCommand(), "build", "-o", out, pkg)
	if b, err := cmd.CombinedOutput(); err != nil {
		return "", fmt.Errorf("go build %s: %v\n%s", pkg, err, b)
	}
	return out, nil
}

// RunCertify runs `weir certify` on the connector and returns its report.
// An error means weir gave no report (it is missing, or failed before
// judging any run); a report with failed runs is not an error.
func RunCertify(ctx context.Context, weir, binary string, o Options, dir string) (*Report, error) {
	suite := o.Suite
	if suite == "" {
		suite = "quick"
	}
	jobs := o.Jobs
	if jobs <= 0 {
		jobs = 2
	}
	jsonPath := filepath.Join(dir, "report.json")
	connector := strings.Join(append([]string{binary}, o.Args...), " ")
	cmd := exec.CommandContext(ctx, weir, "certify", "--suite", suite, "--connector", connector,
		"--jobs", strconv.Itoa(jobs), "--progress", "none", "--json", jsonPath)
	if o.MaxFailures > 0 {
		cmd.Args = append(cmd.Args, "--max-failures", strconv.Itoa(o.MaxFailures))
	}
	out, err := cmd.CombinedOutput()
	report := &Report{Output: string(out)}
	var exit *exec.ExitError
	switch {
	case err == nil:
	case errors.As(err, &exit):
		report.ExitCode = exit.ExitCode()
	default:
		return report, fmt.Errorf("weirtest: running %s: %v", weir, err)
	}
	data, rerr := os.ReadFile(jsonPath)
	if rerr != nil {
		return report, fmt.Errorf("weirtest: weir certify exited %d without a report:\n%s", report.ExitCode, out)
	}
	if err := json.Unmarshal(data, report); err != nil {
		return report, fmt.Errorf("weirtest: the report %s does not parse: %v", jsonPath, err)
	}
	return report, nil
}

// Verdict returns nil when weir certified the connector, else an error that
// names the first failing run and ends with its replay line.
func Verdict(report *Report) error {
	if f := report.FirstFailure(); f != nil {
		failed := 0
		for _, r := range report.Runs {
			if !r.Passed {
				failed++
			}
		}
		why := f.FirstViolation
		if f.HarnessError != "" {
			why = f.HarnessError
		}
		return fmt.Errorf("weir certify: %d of %d runs failed; the first, %s seed %s: %s\nreplay: %s",
			failed, len(report.Runs), filepath.Base(f.Scenario), f.Seed, why, f.Replay)
	}
	if report.ExitCode != 0 {
		return fmt.Errorf("weir certify exited %d:\n%s", report.ExitCode, report.Output)
	}
	return nil
}

// Certify builds the connector, certifies it and fails t unless every run
// passed, with the replay line of the first failing run. It skips t when no
// weir command is found, unless WEIR_REQUIRED=1.
func Certify(t testing.TB, o Options) *Report {
	t.Helper()
	weir, err := findWeir(o)
	if err != nil {
		if os.Getenv("WEIR_REQUIRED") == "1" {
			t.Fatal(err)
		}
		t.Skip(err)
	}
	timeout := o.Timeout
	if timeout <= 0 {
		timeout = 10 * time.Minute
	}
	ctx, cancel := context.WithTimeout(context.Background(), timeout)
	defer cancel()
	dir := t.TempDir()
	binary := o.Binary
	if binary == "" {
		if o.Package == "" {
			t.Fatal("weirtest: Options.Package or Options.Binary is required")
		}
		if binary, err = Build(ctx, o.Package, dir); err != nil {
			t.Fatal(err)
		}
	}
	report, err := RunCertify(ctx, weir, binary, o, dir)
	if err != nil {
		t.Fatal(err)
	}
	if err := Verdict(report); err != nil {
		t.Fatal(err)
	}
	return report
}
