// Command rcdemand estimates random-coefficients logit demand from
// market-level data and uses it: elasticities, diversion, markups, merger
// simulation and screening. Run "rcdemand --help" for the commands.
package main

import (
	"errors"
	"fmt"
	"io"
	"os"
	"os/signal"
	"runtime/debug"
	"strings"
	"sync"
	"time"

	"github.com/spf13/cobra"

	"rcdemand/data"
	"rcdemand/demand"
	"rcdemand/merger"
)

// version is set at build time with -ldflags "-X main.version=…".
var version = "0.3.0-dev"

// caution goes with every merger, screening and report output on screen.
const caution = "Caution: " + merger.Caution

// interrupt is closed on the first SIGINT; long commands watch it.
var (
	interrupt     = make(chan struct{})
	interruptOnce sync.Once
)

// interrupted reports whether SIGINT has arrived, for a command about to
// write its outputs: it then writes none.
func interrupted() bool {
	select {
	case <-interrupt:
		return true
	default:
		return false
	}
}

// Exit statuses (see the README): 0 success, 1 a problem with the input, 2
// a usage error, 3 results written but not converged or without a
// covariance, 4 an internal error, 130 interrupted.
const (
	exitOK          = 0
	exitInput       = 1
	exitUsage       = 2
	exitPartial     = 3
	exitInternal    = 4
	exitInterrupted = 130
)

// internalError marks a failure that is rcdemand's fault, not the user's.
type internalError struct{ err error }

func (e internalError) Error() string { return e.err.Error() }

// usageError is a mistake in the command line itself: an unknown command or
// flag, a missing argument or a flag value out of range.
type usageError struct{ msg string }

func (e usageError) Error() string { return e.msg }

// usagef returns a usageError.
func usagef(format string, args ...any) error { return usageError{fmt.Sprintf(format, args...)} }

func main() {
	os.Exit(run(os.Args[1:], os.Stdout, os.Stderr))
}

// run executes the command line and returns the exit status (exitOK …
// exitInterrupted).
func run(args []string, stdout, stderr io.Writer) (code int) {
	defer func() {
		if r := recover(); r != nil {
			data.RemoveTemporaries()
			fmt.Fprintf(stderr, "rcdemand: internal error: %v\nThis is a bug in rcdemand %s. Please report it with the command you ran, "+
				"the spec file and this message (the stack is in the environment variable RCDEMAND_DEBUG=1 output).\n", r, version)
			if os.Getenv("RCDEMAND_DEBUG") == "1" {
				stderr.Write(debug.Stack())
			}
			code = exitInternal
		}
	}()
	sig := make(chan os.Signal, 1)
	signal.Notify(sig, os.Interrupt)
	defer signal.Stop(sig)
	go func() {
		if _, ok := <-sig; !ok {
			return
		}
		interruptOnce.Do(func() { close(interrupt) })
		// Give the command a moment to stop by itself, then leave.
		time.Sleep(3 * time.Second)
		data.RemoveTemporaries()
		fmt.Fprintln(stderr, "rcdemand: interrupted")
		os.Exit(exitInterrupted)
	}()
	root := newRoot(stdout, stderr)
	root.SetArgs(args)
	err := root.Execute()
	if err == nil {
		return exitOK
	}
	data.RemoveTemporaries()
	if errors.Is(err, demand.ErrInterrupted) {
		fmt.Fprintln(stderr, "rcdemand: interrupted; no output was written or changed")
		return exitInterrupted
	}
	if strings.HasPrefix(err.Error(), "unknown command ") {
		err = unknownCommand(root, args)
	}
	code = exitCode(err)
	switch code {
	case exitUsage:
		fmt.Fprintf(stderr, "rcdemand: %v (see \"%s --help\")\n", err, strings.TrimSpace("rcdemand "+commandName(root, args)))
	case exitPartial:
		fmt.Fprintf(stderr, "rcdemand: warning: %v\n", err)
	default:
		fmt.Fprintf(stderr, "rcdemand: %v\n", err)
	}
	return code
}

// exitCode maps an error to the exit status; an error with an ExitCode
// method (such as *partialError, results written but short) gives its own.
// run has already made cobra's unknown-command error a usageError.
func exitCode(err error) int {
	var ie internalError
	var ue usageError
	var coded interface{ ExitCode() int }
	switch {
	case errors.As(err, &ie):
		return exitInternal
	case errors.As(err, &ue):
		return exitUsage
	case errors.As(err, &coded):
		return coded.ExitCode()
	}
	return exitInput
}

// unknownCommand is cobra's unknown-command error on one line, with its
// suggestions.
func unknownCommand(root *cobra.Command, args []string) error {
	name := ""
	for _, a := range args {
		if !strings.HasPrefix(a, "-") {
			name = a
			break
		}
	}
	msg := fmt.Sprintf("unknown command %q", name)
	if sug := root.SuggestionsFor(name); len(sug) > 0 {
		msg += fmt.Sprintf(" (did you mean %s?)", strings.Join(sug, " or "))
	}
	return usageError{msg}
}

// commandName returns the name of the subcommand args run, or "" for the
// root, for the hint after a usage error.
func commandName(root *cobra.Command, args []string) string {
	c, _, err := root.Find(args)
	if err != nil || c == root {
		return ""
	}
	return c.Name()
}

func newRoot(stdout, stderr io.Writer) *cobra.Command {
	root := &cobra.Command{
		Use:   "rcdemand",
		Short: "Random-coefficients logit demand estimation and merger simulation",
		Long: `rcdemand estimates random-coefficients logit demand from market-level data
(shares, prices, characteristics, owners, instruments, optionally consumer
demographics) by two-step GMM, and computes elasticities, diversion ratios,
markups and merger effects.

Start with "rcdemand demo", which runs the whole job on built-in data.`,
		Version:       version,
		SilenceUsage:  true,
		SilenceErrors: true,
	}
	root.SetVersionTemplate("rcdemand {{.Version}}\n")
	root.SetOut(stdout)
	root.SetErr(stderr)
	root.SetFlagErrorFunc(func(_ *cobra.Command, err error) error { return usageError{err.Error()} })
	root.PersistentFlags().BoolP("quiet", "q", false, "no progress bar and no notes (warnings and errors still go to stderr)")
	root.AddCommand(newDemo(), newCheck(), newEstimate(), newVersion())
	for _, c := range extraCommands {
		root.AddCommand(c())
	}
	for _, c := range root.Commands() {
		usageArgs(c)
	}
	return root
}

// usageArgs makes a command's argument check return usage errors (exit 2),
// whichever cobra.PositionalArgs it uses.
func usageArgs(c *cobra.Command) {
	check := c.Args
	if check == nil {
		return
	}
	c.Args = func(cmd *cobra.Command, args []string) error {
		err := check(cmd, args)
		var ue usageError
		if err != nil && !errors.As(err, &ue) {
			return usageError{err.Error()}
		}
		return err
	}
}

// extraCommands lets other files register commands.
var extraCommands []func() *cobra.Command

func newVersion() *cobra.Command {
	return &cobra.Command{
		Use:     "version",
		Short:   "Print the version (also rcdemand --version)",
		Example: "  rcdemand version\n  rcdemand --version",
		Args:    noArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			fmt.Fprintf(cmd.OutOrStdout(), "rcdemand %s\n", version)
			return nil
		},
	}
}
