// Command trajvault turns folders of molecular-dynamics text logs into
// repository-ready deposits and checks deposits: see README.md.
//
// Exit status, for every command: 0 success, 1 findings (a check failed),
// 2 usage or I/O error.
package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"os/signal"
	"runtime/debug"
	"strings"
	"sync"
	"syscall"

	"github.com/agnivade/levenshtein"
	"github.com/spf13/pflag"

	"github.com/spf13/cobra"

	"trajvault/internal/outdir"
)

// Exit codes: the contract with scripts.
const (
	exitOK       = 0
	exitFindings = 1
	exitUsage    = 2
)

// version is set at build time (-ldflags "-X main.version=v1.2.3"); a
// development build reports the VCS revision when Go recorded it.
var version = "dev"

func toolVersion() string {
	if version != "dev" {
		return version
	}
	if bi, ok := debug.ReadBuildInfo(); ok {
		for _, s := range bi.Settings {
			if s.Key == "vcs.revision" && len(s.Value) >= 12 {
				return "dev+" + s.Value[:12]
			}
		}
	}
	return version
}

// globals are shared by every command.
type globals struct {
	stdout, stderr io.Writer
	stderrTTY      bool // progress bars go to stderr only on a terminal
	quiet          bool // --quiet: no progress bars
}

// exitError carries an exit status out of a command; findingsError is
// exit 1, anything else 2.
type exitError struct {
	code int
	err  error
}

func (e *exitError) Error() string { return e.err.Error() }

// errFindings reports that checks ran and found errors; the command has
// already printed them.
var errFindings = errors.New("findings")

// errReported is a usage or I/O failure whose message the command has
// already printed (one line per file); run only sets exit status 2.
var errReported = errors.New("reported")

func newRootCommand(g *globals) *cobra.Command {
	addTemplateFuncs()
	root := &cobra.Command{
		Use:   "trajvault",
		Short: "Package and check molecular-dynamics trajectories as open data",
		Long: `trajvault reads legacy molecular-dynamics text logs, writes them as
compressed H5MD files with units and provenance, and checks deposits:
layout, units and metadata (validate) and the physics of each run.

Exit status: 0 success, 1 findings (a check failed), 2 usage or I/O error.`,
		SilenceUsage:  true,
		SilenceErrors: true,
		Version:       toolVersion(),
	}
	root.PersistentFlags().BoolVarP(&g.quiet, "quiet", "q", false, "no progress bars (they are shown only when stderr is a terminal)")
	root.SetUsageTemplate(usageTemplate)
	root.SetOut(g.stdout)
	root.SetErr(g.stderr)
	root.SetFlagErrorFunc(func(c *cobra.Command, err error) error {
		if hint := suggestFlag(c, err); hint != "" {
			return &exitError{exitUsage, fmt.Errorf("%w; did you mean %s? (see %s --help)", err, hint, c.CommandPath())}
		}
		return &exitError{exitUsage, fmt.Errorf("%w (see %s --help)", err, c.CommandPath())}
	})
	root.AddCommand(
		newValidateCommand(g),
		newInspectCommand(g),
		newDemoCommand(g),
		newScanCommand(g),
		newConvertCommand(g),
		newExportCommand(g),
		newAuditCommand(g),
		newPackCommand(g),
		newInitCommand(g),
		newCompareCommand(g),
		newWorkerCommand(g),
		newConvertWorkerCommand(g),
		newSlurmCommand(g),
		newMemberCommand(g),
	)
	return root
}

// helpWidth is the width of help text: 80 columns, as every text output.
const helpWidth = 80

// usageTemplate is cobra's usage template with the flag descriptions and
// the command summaries wrapped at helpWidth (issue 15: help lines of up
// to 176 columns).
const usageTemplate = `Usage:{{if .Runnable}}
  {{.UseLine}}{{end}}{{if .HasAvailableSubCommands}}
  {{.CommandPath}} [command]{{end}}{{if gt (len .Aliases) 0}}

Aliases:
  {{.NameAndAliases}}{{end}}{{if .HasExample}}

Examples:
{{.Example}}{{end}}{{if .HasAvailableSubCommands}}

Available Commands:{{range .Commands}}{{if (or .IsAvailableCommand (eq .Name "help"))}}
  {{rpad .Name .NamePadding }} {{hang .Short (add .NamePadding 3)}}{{end}}{{end}}{{end}}{{if .HasAvailableLocalFlags}}

Flags:
{{flags80 .LocalFlags}}{{end}}{{if .HasAvailableInheritedFlags}}

Global Flags:
{{flags80 .InheritedFlags}}{{end}}{{if .HasAvailableSubCommands}}

Use "{{.CommandPath}} [command] --help" for more information about a command.{{end}}
`

var addTemplateFuncs = sync.OnceFunc(func() {
	cobra.AddTemplateFunc("flags80", func(fs *pflag.FlagSet) string {
		return strings.TrimRight(fs.FlagUsagesWrapped(helpWidth), " \n")
	})
	cobra.AddTemplateFunc("add", func(a, b int) int { return a + b })
	cobra.AddTemplateFunc("hang", hang)
})

// hang wraps s at helpWidth for text that starts at column indent, the
// continuation lines indented as far.
func hang(s string, indent int) string {
	var b strings.Builder
	col := indent
	for i, w := range strings.Fields(s) {
		if i > 0 && col+1+len(w) > helpWidth {
			b.WriteString("\n" + strings.Repeat(" ", indent))
			col = indent
		} else if i > 0 {
			b.WriteByte(' ')
			col++
		}
		b.WriteString(w)
		col += len(w)
	}
	return b.String()
}

// suggestFlag names the flag of c closest to the unknown one in err
// ("unknown flag: --units" -> "--unit"), or "" when none is close: at
// most two edits, or one for short names.
func suggestFlag(c *cobra.Command, err error) string {
	const prefix = "unknown flag: --"
	msg := err.Error()
	if !strings.HasPrefix(msg, prefix) {
		return ""
	}
	given := strings.TrimPrefix(msg, prefix)
	best, bestD := "", 3
	if len(given) <= 4 {
		bestD = 2
	}
	visit := func(f *pflag.Flag) {
		if f.Hidden {
			return
		}
		if d := levenshtein.ComputeDistance(given, f.Name); d < bestD {
			best, bestD = f.Name, d
		}
	}
	c.Flags().VisitAll(visit)
	c.InheritedFlags().VisitAll(visit)
	if best == "" {
		return ""
	}
	return "--" + best
}

// run executes the command line and returns the exit status. Long work
// takes ctx from here (commands get it with cobra's Command.Context) and
// stops when it is cancelled.
func run(ctx context.Context, args []string, g *globals) int {
	root := newRootCommand(g)
	root.SetArgs(args)
	err := root.ExecuteContext(ctx)
	outdir.Tidy() // markers of temporary outputs that are in place now
	switch {
	case err == nil:
		return exitOK
	case errors.Is(err, errFindings):
		return exitFindings
	case errors.Is(err, errReported):
		return exitUsage
	}
	fmt.Fprintf(g.stderr, "trajvault: %v\n", err)
	var ee *exitError
	if errors.As(err, &ee) {
		return ee.code
	}
	return exitUsage
}

func isTerminal(f *os.File) bool {
	st, err := f.Stat()
	return err == nil && st.Mode()&os.ModeCharDevice != 0
}

func main() {
	g := &globals{stdout: os.Stdout, stderr: os.Stderr, stderrTTY: isTerminal(os.Stderr)}
	// Ctrl-C or a scheduler's SIGTERM cancels the work; outputs are
	// written atomically, so nothing half-made is left under a final name.
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	code := run(ctx, os.Args[1:], g)
	stop()
	os.Exit(code)
}
