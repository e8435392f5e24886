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

// internalError marks a failure that is rcdemand's fault, not the user's.
type internalError struct{ err error }

func (e internalError) Error() string { return e.err.Error() }

func main() {
	os.Exit(run(os.Args[1:], os.Stdout, os.Stderr))
}

// run executes the command line and returns the exit status: 0 success, 1 a
// user error, 2 an internal error, 130 interrupted.
func run(args []string, stdout, stderr io.Writer) (code int) {
	defer func() {
		if r := recover(); r != nil {
			data.RemoveTemporaries()
			fmt.Fprintf(stderr, "rcdemand: internal error: %v\nThis is a bug in rcdemand %s. Please report it with the command you ran, "+
				"the spec file and this message (the stack is in the environment variable RCDEMAND_DEBUG=1 output).\n", r, version)
			if os.Getenv("RCDEMAND_DEBUG") == "1" {
				stderr.Write(debug.Stack())
			}
			code = 2
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
		os.Exit(130)
	}()
	root := newRoot(stdout, stderr)
	root.SetArgs(args)
	err := root.Execute()
	switch {
	case err == nil:
		return 0
	case errors.Is(err, demand.ErrInterrupted):
		data.RemoveTemporaries()
		fmt.Fprintln(stderr, "rcdemand: interrupted; no output was written or changed")
		return 130
	default:
		data.RemoveTemporaries()
		fmt.Fprintf(stderr, "rcdemand: %v\n", err)
		var coded interface{ ExitCode() int }
		if errors.As(err, &coded) {
			return coded.ExitCode()
		}
		var ie internalError
		if errors.As(err, &ie) {
			return 2
		}
		return 1
	}
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
		SilenceUsage:  true,
		SilenceErrors: true,
	}
	root.SetOut(stdout)
	root.SetErr(stderr)
	root.AddCommand(newDemo(), newCheck(), newEstimate(), newVersion())
	for _, c := range extraCommands {
		root.AddCommand(c())
	}
	return root
}

// extraCommands lets other files register commands.
var extraCommands []func() *cobra.Command

func newVersion() *cobra.Command {
	return &cobra.Command{
		Use:     "version",
		Short:   "Print the version",
		Example: "  rcdemand version",
		Args:    cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			fmt.Fprintf(cmd.OutOrStdout(), "rcdemand %s\n", version)
			return nil
		},
	}
}
