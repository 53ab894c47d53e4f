// Command veer screens workers' irregular medical exams against reference
// curves from a healthy cohort. Its standard output is data, its standard
// error is talk; it exits 0 on success, 1 when the work failed (bad data,
// unreadable model), 2 when the command line itself is wrong and 3 when
// screen or report wrote their output but some exam rows could not be
// screened (their status says why).
//
// A signal from veer is a prompt for review by a licensed clinician under
// local occupational-health rules, not a diagnosis.
package main

import (
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"runtime/debug"
	"strings"

	"veer/functions/screening"
	"veer/internal/version"
)

// command is one veer subcommand.
type command struct {
	name    string
	summary string
	run     func(env *env, args []string) error
	// batch: the command works through a file and ends (fit, screen,
	// report, demo); it runs with a higher GC target (see main).
	batch bool
}

// env carries the process streams so commands can be tested in-process.
type env struct {
	stdout io.Writer
	stderr io.Writer
	stdin  io.Reader
	// stderrTerminal: stderr is a terminal, so progress may rewrite a line
	// in place.
	stderrTerminal bool
}

// usageError marks a wrong command line (exit code 2).
type usageError struct{ msg string }

func (e usageError) Error() string { return e.msg }

func usagef(format string, a ...any) error { return usageError{fmt.Sprintf(format, a...)} }

func commands() []command {
	return []command{
		{"fit", "fit a reference model from a CSV of healthy workers' exams", runFit, true},
		{"curve", "print reference mean, sd and centiles at given ages", runCurve, false},
		{"limit", "compute the control limit for a target time to a false signal", runLimit, false},
		{"delay", "expected years from the start of a sustained shift to a signal", runDelay, false},
		{"screen", "screen a CSV file or .xlsx workbook of exams against a model", runScreen, true},
		{"report", "screen exams and write a self-contained HTML report", runReport, true},
		{"evaluate", "score the chart, alert rules and a centile cut-off on a history of later diagnoses", runEvaluate, true},
		{"serve", "run the local function server for spreadsheet add-ins", runServe, false},
		{"token", "print the write token that add-ins need (creating it if needed)", runToken, false},
		{"cert", "create the local HTTPS certificate the web add-in needs", runCert, false},
		{"addin", "print the web add-in's manifest or function metadata", runAddin, false},
		{"calc-extension", "build the LibreOffice Calc extension (veer.oxt) from the function catalogue", runCalcExtension, false},
		{"demo", "run the whole screening job on the embedded demo data", runDemo, true},
		{"version", "print veer's version", runVersion, false},
	}
}

// outputPerm is the mode of the files veer writes (models, screened
// tables, reports): they hold health data, so only their owner reads them.
const outputPerm = 0o600

func mainUsage(w io.Writer) {
	fmt.Fprintln(w, "veer — screening of workers' medical exams against healthy reference curves")
	fmt.Fprintln(w)
	fmt.Fprintln(w, "Usage: veer <command> [flags]   (veer <command> --help for the flags)")
	fmt.Fprintln(w)
	cmds := commands()
	width := 0
	for _, c := range cmds {
		width = max(width, len(c.name))
	}
	for _, c := range cmds {
		fmt.Fprintf(w, "  %-*s  %s\n", width, c.name, c.summary)
	}
	fmt.Fprintln(w)
	fmt.Fprintln(w, screening.Caution)
}

func main() {
	if batchCommand(os.Args[1:]) {
		// Screening a large sheet allocates a few large, long-lived
		// tables; collecting garbage less often saves a fifth of the
		// time. Not for veer serve: a long-running server keeps the
		// default, so its memory stays close to what it holds.
		debug.SetGCPercent(400)
	}
	os.Exit(run(&env{stdout: os.Stdout, stderr: os.Stderr, stdin: os.Stdin, stderrTerminal: isTerminal(os.Stderr)}, os.Args[1:]))
}

// isTerminal reports whether f is a terminal (a character device).
func isTerminal(f *os.File) bool {
	fi, err := f.Stat()
	return err == nil && fi.Mode()&os.ModeCharDevice != 0
}

// batchCommand reports whether the command line runs a batch command.
func batchCommand(args []string) bool {
	if len(args) == 0 {
		return false
	}
	for _, c := range commands() {
		if c.name == args[0] {
			return c.batch
		}
	}
	return false
}

// run executes one command line and returns the exit code.
func run(e *env, args []string) int {
	if len(args) == 0 || args[0] == "-h" || args[0] == "--help" || args[0] == "help" {
		mainUsage(e.stderr)
		if len(args) == 0 {
			return 2
		}
		return 0
	}
	for _, c := range commands() {
		if c.name != args[0] {
			continue
		}
		err := c.run(e, args[1:])
		if err == nil {
			return 0
		}
		if errors.Is(err, flag.ErrHelp) {
			return 0
		}
		var skipped rowsSkipped
		if errors.As(err, &skipped) {
			// The output was written and the summary said which rows
			// were not screened.
			return exitSkipped
		}
		var ue usageError
		if errors.As(err, &ue) {
			fmt.Fprintf(e.stderr, "veer %s: %v\n", c.name, err)
			fmt.Fprintf(e.stderr, "Run 'veer %s --help' for the flags.\n", c.name)
			return 2
		}
		fmt.Fprintf(e.stderr, "veer %s: %v\n", c.name, err)
		return 1
	}
	fmt.Fprintf(e.stderr, "veer: unknown command %q; the commands are: %s\n", args[0], commandNames())
	return 2
}

func commandNames() string {
	var n []string
	for _, c := range commands() {
		n = append(n, c.name)
	}
	return strings.Join(n, ", ")
}

// newFlags makes a flag set whose errors are returned, not printed-and-exited,
// with a usage text that lists the flags.
func newFlags(e *env, name, synopsis string) *flag.FlagSet {
	fs := flag.NewFlagSet("veer "+name, flag.ContinueOnError)
	fs.SetOutput(e.stderr)
	fs.Usage = func() {
		fmt.Fprintf(e.stderr, "Usage: veer %s %s\n\nFlags:\n", name, synopsis)
		printFlags(fs)
	}
	return fs
}

// hiddenUsage marks a flag that --help does not list: an earlier spelling
// of a flag, kept working (see alias).
const hiddenUsage = "\x00hidden"

// alias makes old another name of the flag called name, kept working for
// command lines written for earlier releases; --help lists only name.
func alias(fs *flag.FlagSet, old, name string) {
	f := fs.Lookup(name)
	if f == nil {
		panic("veer: alias of an unknown flag " + name)
	}
	fs.Var(f.Value, old, hiddenUsage)
}

// printFlags prints the flags of fs as flag.PrintDefaults does, without the
// hidden ones.
func printFlags(fs *flag.FlagSet) {
	shown := flag.NewFlagSet(fs.Name(), flag.ContinueOnError)
	shown.SetOutput(fs.Output())
	fs.VisitAll(func(f *flag.Flag) {
		if f.Usage == hiddenUsage {
			return
		}
		shown.Var(f.Value, f.Name, f.Usage)
		shown.Lookup(f.Name).DefValue = f.DefValue
	})
	shown.PrintDefaults()
}

// parseFlags parses and turns flag errors into usage errors.
func parseFlags(fs *flag.FlagSet, args []string) error {
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return err
		}
		return usageError{err.Error()}
	}
	if fs.NArg() > 0 {
		if i := len(args) - fs.NArg(); i > 0 && (args[i-1] == "--extrapolate" || args[i-1] == "-extrapolate") {
			return usagef("unexpected argument %q: --extrapolate takes no value; give the years with --reach %s", fs.Arg(0), fs.Arg(0))
		}
		return usagef("unexpected argument %q", fs.Arg(0))
	}
	return nil
}

// required reports a usage error for any named flag left empty.
func required(pairs ...string) error {
	for i := 0; i+1 < len(pairs); i += 2 {
		if pairs[i+1] == "" {
			return usagef("--%s is required", pairs[i])
		}
	}
	return nil
}

func runVersion(e *env, args []string) error {
	fs := newFlags(e, "version", "")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	fmt.Fprintf(e.stdout, "veer %s\n", version.String())
	return nil
}
