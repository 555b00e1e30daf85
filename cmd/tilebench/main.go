// Command tilebench chooses patch sizes for, stresses, and exports the
// inputs of patch-based vision policies. Run "tilebench help" for the
// commands. This package only parses flags and wires the library together.
package main

import (
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"sort"
	"strconv"
	"strings"

	"tilebench/internal/atomicfile"
	"tilebench/vision/policies"
)

// command is one subcommand. Each lives in a file of its own and registers
// itself from init.
type command struct {
	name    string
	summary string
	// run parses args (the words after the command name) and does the
	// work. It returns a usageError for bad flags or arguments.
	run func(ctx *runContext, args []string) error
}

// runContext carries the process's streams so that commands can be tested.
type runContext struct {
	stdin          io.Reader
	stdout, stderr io.Writer
}

var commands = map[string]*command{}

func register(c *command) {
	if _, dup := commands[c.name]; dup {
		panic("duplicate command " + c.name)
	}
	commands[c.name] = c
}

// usageError marks an error in how the command was called (exit status 2).
type usageError struct{ err error }

func (u usageError) Error() string { return u.err.Error() }
func (u usageError) Unwrap() error { return u.err }

// usagef returns a usageError with a formatted message.
func usagef(format string, a ...any) error { return usageError{fmt.Errorf(format, a...)} }

// newFlags returns a flag set that reports errors instead of exiting, and
// whose -help output goes to ctx.stdout.
func newFlags(ctx *runContext, name, usage string) *flag.FlagSet {
	fs := flag.NewFlagSet("tilebench "+name, flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	fs.Usage = func() {
		fmt.Fprintf(ctx.stdout, "usage: tilebench %s\n\n", usage)
		printDefaults(ctx.stdout, fs)
	}
	return fs
}

// hidden holds the old spellings of options, kept working but not shown
// in -help: flag set → old name → new name.
var hidden = map[*flag.FlagSet]map[string]string{}

// alias declares old as a hidden second name of the option new (already
// declared on fs), so that command lines written before a rename work.
func alias(fs *flag.FlagSet, old, new string) {
	f := fs.Lookup(new)
	fs.Var(f.Value, old, "old name of --"+new)
	if hidden[fs] == nil {
		hidden[fs] = map[string]string{}
	}
	hidden[fs][old] = new
}

// printDefaults is flag.PrintDefaults without the hidden aliases.
func printDefaults(w io.Writer, fs *flag.FlagSet) {
	fs.VisitAll(func(f *flag.Flag) {
		if _, h := hidden[fs][f.Name]; h {
			return
		}
		name, usage := flag.UnquoteUsage(f)
		line := "  -" + f.Name
		if name != "" {
			line += " " + name
		}
		if len(line) <= 4 { // one-letter bool flags keep usage on the line
			line += "\t"
		} else {
			line += "\n    \t"
		}
		line += strings.ReplaceAll(usage, "\n", "\n    \t")
		if d := f.DefValue; d != "" && d != "0" && d != "false" && !isZeroDuration(d) {
			if _, isString := f.Value.(interface{ IsBoolFlag() bool }); !isString && isStringFlag(f) {
				line += fmt.Sprintf(" (default %q)", d)
			} else {
				line += fmt.Sprintf(" (default %v)", d)
			}
		}
		fmt.Fprintln(w, line)
	})
}

func isZeroDuration(d string) bool { return d == "0s" }

// isStringFlag reports whether f holds a plain string (defaults quoted).
func isStringFlag(f *flag.Flag) bool {
	_, ok := f.Value.(flag.Getter)
	if !ok {
		return false
	}
	_, isStr := f.Value.(flag.Getter).Get().(string)
	return isStr
}

// parseFlags parses args into fs, turning flag errors into usage errors.
// It returns errHelp when -h or -help was given (after printing usage).
func parseFlags(fs *flag.FlagSet, args []string) error {
	// The flag package prints the usage on every parse error; only -help
	// should (a bad value gets one line, from finish).
	usage := fs.Usage
	fs.Usage = func() {}
	err := fs.Parse(args)
	fs.Usage = usage
	if err != nil {
		if errors.Is(err, flag.ErrHelp) {
			usage()
			return errHelp
		}
		return usageError{err}
	}
	return nil
}

// refuseZero is a usage error when one of the named flags was given as 0
// (or 0.0): for those flags 0 stands for "the default", which a user who
// typed 0 did not mean.
func refuseZero(fs *flag.FlagSet, names ...string) error {
	var err error
	fs.Visit(func(f *flag.Flag) {
		if err != nil {
			return
		}
		for _, n := range names {
			if f.Name == n {
				if v, perr := strconv.ParseFloat(f.Value.String(), 64); perr == nil && v == 0 {
					err = usagef("--%s 0: want a positive value (leave the flag out for the default)", n)
				}
			}
		}
	})
	return err
}

// checkOutputs checks, before any work, that file (if given) can be
// written and that dir (if given) is or can become a writable folder.
func checkOutputs(file, dir string) error {
	if file != "" {
		if err := atomicfile.CheckFile(file); err != nil {
			return err
		}
	}
	if dir != "" {
		return atomicfile.CheckDir(dir)
	}
	return nil
}

// exitError ends a command with its own exit status (after the work
// was done and its outcome printed).
type exitError struct {
	code int
	err  error
}

func (e exitError) Error() string { return e.err.Error() }
func (e exitError) Unwrap() error { return e.err }

// ExitFailedEpisodes is the exit status of a study (stress, sizes) that
// finished with failed episodes, and of merge with --allow-partial when
// episodes are missing or failed: the outputs are written, but the
// numbers rest on fewer episodes than asked for.
const ExitFailedEpisodes = 3

// errHelp ends a command successfully after its help was printed.
var errHelp = errors.New("help printed")

func main() {
	ctx := &runContext{stdin: os.Stdin, stdout: os.Stdout, stderr: os.Stderr}
	stop, err := startProfile()
	if err != nil {
		fmt.Fprintf(ctx.stderr, "tilebench: %v\n", err)
		os.Exit(1)
	}
	code := run(ctx, os.Args[1:])
	stop()
	os.Exit(code)
}

// run executes one command line and returns the exit status: 0 success,
// 1 runtime failure, 2 usage error.
func run(ctx *runContext, args []string) int {
	if len(args) == 0 {
		// No command is a usage error: the help goes to stderr.
		printHelp(ctx.stderr)
		return 2
	}
	if args[0] == "help" || args[0] == "-h" || args[0] == "--help" || args[0] == "-help" {
		if len(args) > 1 {
			if c, ok := commands[args[1]]; ok {
				return finish(ctx, c.run(ctx, []string{"-help"}))
			}
		}
		printHelp(ctx.stdout)
		return 0
	}
	c, ok := commands[args[0]]
	if !ok {
		fmt.Fprintf(ctx.stderr, "tilebench: unknown command %q (run \"tilebench help\")\n", args[0])
		return 2
	}
	return finish(ctx, c.run(ctx, args[1:]))
}

func finish(ctx *runContext, err error) int {
	if err == nil || errors.Is(err, errHelp) {
		return 0
	}
	msg := strings.ReplaceAll(err.Error(), "\n", " ")
	fmt.Fprintf(ctx.stderr, "tilebench: %s\n", msg)
	var u usageError
	var se *policies.SourceError
	if errors.As(err, &u) || errors.As(err, &se) {
		return 2
	}
	var x exitError
	if errors.As(err, &x) {
		return x.code
	}
	return 1
}

func printHelp(w io.Writer) {
	fmt.Fprintln(w, "tilebench: choose patch sizes for, stress, and export the inputs of patch-based vision policies.")
	fmt.Fprintln(w, "\nusage: tilebench COMMAND [options]   (tilebench COMMAND -help for its options)")
	fmt.Fprintln(w, "\ncommands:")
	var names []string
	for n := range commands {
		names = append(names, n)
	}
	sort.Strings(names)
	for _, n := range names {
		fmt.Fprintf(w, "  %-8s %s\n", n, commands[n].summary)
	}
}
