package weirtest_test

import (
	"context"
	"os"
	"strings"
	"testing"
	"time"

	"weir/adapter/weirtest"
)

// These tests start weir and connector processes: ctest runs them as
// go_weirtest (label e2e) with WEIR set to the weir command.

func TestTheGoReferenceIsCertified(t *testing.T) {
	report := weirtest.Certify(t, weirtest.Options{Package: "weir/fixtures/go/cmd/reference"})
	if len(report.Runs) == 0 {
		t.Fatal("certified with no runs")
	}
}

func TestAMutantFailsWithTheReplayLineOfItsFirstFailingRun(t *testing.T) {
	weir := os.Getenv("WEIR")
	if weir == "" {
		t.Skip("WEIR is not set")
	}
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Minute)
	defer cancel()
	dir := t.TempDir()
	binary, err := weirtest.Build(ctx, "weir/fixtures/go/cmd/mutant_ack_on_pull", dir)
	if err != nil {
		t.Fatal(err)
	}
	report, err := weirtest.RunCertify(ctx, weir, binary, weirtest.Options{MaxFailures: 1}, dir)
	if err != nil {
		t.Fatal(err)
	}
	verdict := weirtest.Verdict(report)
	first := report.FirstFailure()
	if verdict == nil || first == nil || report.ExitCode != 1 {
		t.Fatalf("the mutant was not refused: exit %d, verdict %v", report.ExitCode, verdict)
	}
	lines := strings.Split(verdict.Error(), "\n")
	want := "replay: " + weir + " run --scenario " + first.Scenario + " --seed " + first.Seed + " --connector " + binary
	if lines[len(lines)-1] != want {
		t.Errorf("the verdict ends with\n%q\nwant\n%q", lines[len(lines)-1], want)
	}
	if !strings.Contains(verdict.Error(), "ack-before-commit") {
		t.Errorf("the verdict does not name ack-before-commit: %v", verdict)
	}
}

func TestBuildReportsACompileError(t *testing.T) {
	_, err := weirtest.Build(context.Background(), "weir/fixtures/go/no_such_package", t.TempDir())
	if err == nil || !strings.Contains(err.Error(), "go build weir/fixtures/go/no_such_package") {
		t.Errorf("Build: %v", err)
	}
}
