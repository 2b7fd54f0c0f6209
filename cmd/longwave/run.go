package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"sort"
	"strings"

	"longwave/server/store"
)

// Exit statuses.
const (
	exitDone    = 0
	exitFailed  = 1
	exitUsage   = 2
	defaultDB   = "longwave.db"
	programName = "longwave"
)

// usageError is a wrong invocation: exit status 2 and the command's usage.
type usageError struct{ msg string }

func (e usageError) Error() string { return e.msg }

func usagef(format string, args ...any) error { return usageError{fmt.Sprintf(format, args...)} }

// env is what a command may touch besides its flags: the standard streams.
type env struct {
	ctx    context.Context
	stdin  io.Reader
	stdout io.Writer
	stderr io.Writer
}

// command is one subcommand: its flags are declared by setup, which returns
// the function that runs it with the positional arguments.
type command struct {
	name    string
	args    string // positional arguments, for the usage line
	summary string
	// more is printed after the flags in --help.
	more  string
	setup func(fs *flag.FlagSet, e *env) func(args []string) error
}

// commands is filled by each command's file (init).
var commands = map[string]*command{}

func register(c *command) { commands[c.name] = c }

// Run runs longwave with args (without the program name) and returns the
// exit status. Tests call it to run the real program in-process.
func Run(ctx context.Context, args []string, stdin io.Reader, stdout, stderr io.Writer) int {
	if len(args) == 0 {
		printCommands(stderr)
		return exitUsage
	}
	name := args[0]
	if name == "help" || name == "-h" || name == "--help" || name == "-help" {
		if len(args) > 1 {
			if c, ok := commands[args[1]]; ok {
				printUsage(stdout, c, newFlagSet(c, &env{ctx: ctx, stdin: stdin, stdout: stdout, stderr: stderr}))
				return exitDone
			}
		}
		printCommands(stdout)
		return exitDone
	}
	c, ok := commands[name]
	if !ok {
		fmt.Fprintf(stderr, "%s: unknown command %q\n", programName, name)
		printCommands(stderr)
		return exitUsage
	}
	e := &env{ctx: ctx, stdin: stdin, stdout: stdout, stderr: stderr}
	fs := flag.NewFlagSet(programName+" "+c.name, flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	fs.Usage = func() {}
	runFn := c.setup(fs, e)
	pos, err := parseInterspersed(fs, args[1:])
	if errors.Is(err, flag.ErrHelp) {
		printUsage(stdout, c, fs)
		return exitDone
	}
	if err == nil {
		err = runFn(pos)
	}
	var ue usageError
	switch {
	case err == nil:
		return exitDone
	case errors.As(err, &ue), isFlagError(err):
		fmt.Fprintf(stderr, "%s %s: %s\n", programName, c.name, oneLine(err.Error()))
		printUsage(stderr, c, fs)
		return exitUsage
	default:
		fmt.Fprintf(stderr, "%s %s: %s\n", programName, c.name, oneLine(err.Error()))
		return exitFailed
	}
}

// flagError marks errors of flag parsing (unknown flag, bad value).
type flagError struct{ error }

func isFlagError(err error) bool {
	var fe flagError
	return errors.As(err, &fe)
}

// parseInterspersed parses flags that may stand before or after the
// positional arguments ("ingest F --patient X" as well as "ingest --patient
// X F"); "--" ends the flags.
func parseInterspersed(fs *flag.FlagSet, args []string) ([]string, error) {
	var pos []string
	for {
		if err := fs.Parse(args); err != nil {
			if errors.Is(err, flag.ErrHelp) {
				return nil, err
			}
			return nil, flagError{err}
		}
		rest := fs.Args()
		if len(rest) == 0 {
			return pos, nil
		}
		if len(args) > 0 && len(rest) < len(args) && args[len(args)-len(rest)-1] == "--" {
			return append(pos, rest...), nil
		}
		pos = append(pos, rest[0])
		args = rest[1:]
	}
}

func newFlagSet(c *command, e *env) *flag.FlagSet {
	fs := flag.NewFlagSet(programName+" "+c.name, flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	c.setup(fs, e)
	return fs
}

func printUsage(w io.Writer, c *command, fs *flag.FlagSet) {
	fmt.Fprintf(w, "usage: %s %s [flags] %s\n\n%s\n", programName, c.name, c.args, c.summary)
	hasFlags := false
	fs.VisitAll(func(*flag.Flag) { hasFlags = true })
	if hasFlags {
		fmt.Fprintf(w, "\nflags:\n")
		fs.SetOutput(w)
		fs.PrintDefaults()
		fs.SetOutput(io.Discard)
	}
	if c.more != "" {
		fmt.Fprintf(w, "\n%s", c.more)
		if !strings.HasSuffix(c.more, "\n") {
			fmt.Fprintln(w)
		}
	}
	fmt.Fprintf(w, "\nexit status: 0 done, 1 failed, 2 wrong usage\n")
}

func printCommands(w io.Writer) {
	fmt.Fprintf(w, "usage: %s COMMAND [flags]\n\ncommands:\n", programName)
	names := make([]string, 0, len(commands))
	for n := range commands {
		names = append(names, n)
	}
	sort.Strings(names)
	for _, n := range names {
		fmt.Fprintf(w, "  %-10s %s\n", n, firstSentence(commands[n].summary))
	}
	fmt.Fprintf(w, "\n\"%s COMMAND --help\" explains a command and every flag it takes.\n", programName)
}

func firstSentence(s string) string {
	s = strings.SplitN(s, "\n", 2)[0]
	if i := strings.Index(s, ". "); i >= 0 {
		return s[:i+1]
	}
	return s
}

// oneLine keeps an error on one line of the terminal.
func oneLine(s string) string { return strings.Join(strings.Fields(s), " ") }

// dbFlag declares --db on a command that touches a database.
func dbFlag(fs *flag.FlagSet) *string {
	return fs.String("db", defaultDB, "database `FILE` (created when absent; recordings go in FILE.data/ beside it)")
}

// openStore opens the database named by --db.
func openStore(path string) (*store.Store, error) {
	return store.Open(path)
}

// isTerminal reports whether w is a character device (a terminal), the
// condition for drawing a progress bar.
func isTerminal(w io.Writer) bool { return isCharDevice(w) }

// isTerminalReader is isTerminal for standard input.
func isTerminalReader(r io.Reader) bool { return isCharDevice(r) }

func isCharDevice(v any) bool {
	f, ok := v.(*os.File)
	if !ok {
		return false
	}
	st, err := f.Stat()
	return err == nil && st.Mode()&os.ModeCharDevice != 0
}
