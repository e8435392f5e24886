package main

import (
	"fmt"
	"io"
	"os"
	"strings"

	"github.com/schollz/progressbar/v3"
	"github.com/spf13/cobra"
	"golang.org/x/term"
)

// messages prints warnings, notes and progress bars to stderr, each text
// once however often it is reported; --quiet silences the notes and the
// bars (never the warnings). Results and tables go to stdout.
type messages struct {
	w      io.Writer
	quiet  bool
	seen   map[string]bool
	warned []string // the warnings printed, in order
}

// newMessages returns the messages of a command: stderr and its --quiet.
func newMessages(cmd *cobra.Command) *messages {
	return &messages{w: cmd.ErrOrStderr(), quiet: isQuiet(cmd)}
}

// isQuiet reports the --quiet flag (a flag of every command).
func isQuiet(cmd *cobra.Command) bool {
	q, _ := cmd.Flags().GetBool("quiet")
	return q
}

func (m *messages) print(kind, text string) {
	text = strings.TrimSpace(text)
	if m == nil || text == "" || m.seen[text] {
		return
	}
	if m.seen == nil {
		m.seen = map[string]bool{}
	}
	m.seen[text] = true
	fmt.Fprintf(m.w, "%s: %s\n", kind, text)
}

// warn prints a warning: something that may make the results wrong.
func (m *messages) warn(format string, args ...any) {
	text := strings.TrimSpace(fmt.Sprintf(format, args...))
	if m != nil && text != "" && !m.seen[text] {
		m.warned = append(m.warned, text)
	}
	m.print("warning", text)
}

// note prints a note: a choice made or something dropped, for the record.
func (m *messages) note(format string, args ...any) {
	if m != nil && !m.quiet {
		m.print("note", fmt.Sprintf(format, args...))
	}
}

// progressBar returns a progress indicator on stderr when it is a terminal
// and --quiet was not given, or nil.
func (m *messages) progressBar(what string) *progressbar.ProgressBar {
	file, ok := m.w.(*os.File)
	if m.quiet || !ok || !term.IsTerminal(int(file.Fd())) {
		return nil
	}
	return progressbar.NewOptions(-1, progressbar.OptionSetWriter(m.w), progressbar.OptionSetDescription(what),
		progressbar.OptionSpinnerType(14), progressbar.OptionSetElapsedTime(true), progressbar.OptionClearOnFinish())
}

// bar shows the progress of a task counted in items: progress reports done
// of total items, and finish clears the bar when the task ends. Without a
// bar (stderr not a terminal, or --quiet) progress is nil and finish does
// nothing.
func (m *messages) bar(what string) (progress func(done, total int), finish func()) {
	b := m.progressBar(what)
	if b == nil {
		return nil, func() {}
	}
	progress = func(done, total int) {
		b.ChangeMax(total)
		b.Set(done)
	}
	return progress, func() {
		b.Finish()
		b.Clear()
	}
}

// maxWarnings is the most warnings of one list printed one by one; the
// output file holds them all.
const maxWarnings = 5

// warnings prints each of texts as a warning, the first maxWarnings−1 and
// a count of the others when there are more than maxWarnings.
func (m *messages) warnings(texts []string) {
	for i, t := range texts {
		if len(texts) > maxWarnings && i == maxWarnings-1 {
			m.warn("… and %d more warnings (all are in the output file)", len(texts)-i)
			return
		}
		m.warn("%s", t)
	}
}

// notes prints each of texts as a note.
func (m *messages) notes(texts []string) {
	for _, t := range texts {
		m.note("%s", t)
	}
}

// exactArgs requires n positional arguments, named in the message, as a
// usage error.
func exactArgs(names ...string) cobra.PositionalArgs {
	return func(cmd *cobra.Command, args []string) error {
		switch {
		case len(args) < len(names):
			return usagef("%s needs %s", cmd.Name(), strings.Join(names[len(args):], " and "))
		case len(args) > len(names):
			return usagef("%s takes %d argument(s) (%s), got %d: %q", cmd.Name(), len(names), strings.Join(names, ", "), len(args), strings.Join(args, " "))
		}
		return nil
	}
}

// noArgs refuses positional arguments as a usage error.
func noArgs(cmd *cobra.Command, args []string) error {
	if len(args) > 0 {
		return usagef("%s takes no arguments, got %q", cmd.Name(), strings.Join(args, " "))
	}
	return nil
}
