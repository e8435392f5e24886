package main

import (
	"errors"
	"fmt"
	"io"
	"strings"
	"testing"
)

// Conventions of the command line (tracker #14, point 9): --version, usage
// errors exit 2, internal errors 4, --quiet on every command that prints
// progress or notes (results written but short exit 3: exit_test.go).

// TestVersionFlag: rcdemand --version prints what rcdemand version prints.
func TestVersionFlag(t *testing.T) {
	bin := sharedBinary(t)
	a, _ := mustRun(t, bin, t.TempDir(), 0, "--version")
	b, _ := mustRun(t, bin, t.TempDir(), 0, "version")
	if a != b || !strings.HasPrefix(a, "rcdemand ") {
		t.Fatalf("--version %q, version %q", a, b)
	}
}

// TestUsageErrorsExit2: mistakes in the command line itself exit 2 with
// one line naming the problem and pointing at --help.
func TestUsageErrorsExit2(t *testing.T) {
	bin := sharedBinary(t)
	dir := demoCopy(t)
	mustRun(t, bin, dir, 0, "estimate", "spec.toml", "--out", "results.json", "--quiet")
	tests := []struct {
		name string
		args []string
		want string
	}{
		{"unknown flag", []string{"estimate", "spec.toml", "--outt", "x.json"}, "--outt"},
		{"unknown command", []string{"estimat", "spec.toml"}, "estimat"},
		{"missing argument", []string{"merger", "--combine", "A,B"}, "RESULTS.json"},
		{"extra argument", []string{"check", "spec.toml", "other.toml"}, "other.toml"},
		{"flag value not a number", []string{"merger", "results.json", "--combine", "Harbor Roast,Lumen Beverages", "--draws", "many"}, "--draws"},
		{"negative draws", []string{"merger", "results.json", "--combine", "Harbor Roast,Lumen Beverages", "--draws", "-3"}, "--draws"},
		{"too few draws", []string{"merger", "results.json", "--combine", "Harbor Roast,Lumen Beverages", "--draws", "40"}, "at least 100"},
		{"cost change below −100%", []string{"merger", "results.json", "--combine", "Harbor Roast,Lumen Beverages", "--cost-change", "-2"}, "--cost-change"},
		{"one firm", []string{"merger", "results.json", "--combine", "Harbor Roast"}, "two firms"},
		{"no ownership change", []string{"merger", "results.json"}, "--ownership"},
		{"into without combine", []string{"merger", "results.json", "--ownership", "o.csv", "--into", "X"}, "--into"},
		{"no starts", []string{"estimate", "spec.toml", "--starts", "0"}, "--starts"},
		{"efficiency out of range", []string{"screen", "spec.toml", "--combine", "Harbor Roast,Lumen Beverages", "--efficiency", "2"}, "--efficiency"},
		{"report without --out", []string{"report", "results.json"}, "--out"},
		{"synth format", []string{"synth", "--spec", "spec.toml", "--truth", "t.toml", "--out", "x", "--format", "xml"}, "--format"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, errs := mustRun(t, bin, dir, 2, tc.args...)
			if strings.Count(strings.TrimRight(errs, "\n"), "\n") != 0 || !strings.Contains(errs, tc.want) || !strings.Contains(errs, "--help") {
				t.Errorf("stderr %q: want one line naming %q and pointing at --help", errs, tc.want)
			}
		})
	}
}

// TestExitCodes maps each kind of error to its status.
func TestExitCodes(t *testing.T) {
	tests := []struct {
		err  error
		want int
	}{
		{errors.New("products.csv: data row 2 (line 3), column \"share\": 1.3 is not in (0, 1)"), exitInput},
		{usagef("--draws -1: must be 0 or more"), exitUsage},
		{fmt.Errorf("wrapped: %w", usageError{"x"}), exitUsage},
		{&partialError{"written, not converged"}, exitPartial},
		{internalError{errors.New("bug")}, exitInternal},
		{unknownCommand(newRoot(io.Discard, io.Discard), []string{"estimat", "spec.toml"}), exitUsage}, // what run makes of cobra's error
	}
	for _, tc := range tests {
		if got := exitCode(tc.err); got != tc.want {
			t.Errorf("%v: exit %d, want %d", tc.err, got, tc.want)
		}
	}
	if code, _, errs := runCLI(t, "estimat", "spec.toml"); code != exitUsage || !strings.Contains(errs, `unknown command "estimat" (did you mean estimate?)`) {
		t.Errorf("unknown command: exit %d, stderr %q", code, errs)
	}
}

// TestQuietEverywhere: every command but version takes --quiet; notes go to
// stderr, and --quiet silences them.
func TestQuietEverywhere(t *testing.T) {
	bin := sharedBinary(t)
	dir := demoCopy(t)
	for _, c := range []string{"demo", "synth", "check", "estimate", "elasticities", "merger", "screen", "report"} {
		out, _ := mustRun(t, bin, dir, 0, c, "--help")
		if !strings.Contains(out, "--quiet") {
			t.Errorf("%s --help lists no --quiet", c)
		}
	}
	out, errs := mustRun(t, bin, dir, 0, "check", "spec.toml")
	if !strings.Contains(errs, "note: ") || strings.Contains(out, "note: ") {
		t.Errorf("check: notes must go to stderr\nstdout:\n%s\nstderr:\n%s", out, errs)
	}
	if _, errs := mustRun(t, bin, dir, 0, "check", "spec.toml", "--quiet"); strings.Contains(errs, "note: ") {
		t.Errorf("check --quiet printed notes: %s", errs)
	}
}
