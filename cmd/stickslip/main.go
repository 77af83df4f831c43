// Command stickslip simulates rigid-body contact, fits its physical
// parameters to logged robot runs, tunes controller gains through the
// simulator and replays contact events.
//
// Exit status: 0 on success, 1 when the work itself fails (a solver that
// does not converge, a check that does not pass), 2 for bad input (files,
// flags, values).
package main

import (
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"sort"
	"strings"
)

// command is one subcommand.
type command struct {
	name    string
	summary string
	run     func(env *env, args []string) error
}

// env is what a subcommand may touch: its output streams.
type env struct {
	stdout, stderr io.Writer
}

var commands = map[string]*command{}

func register(c *command) { commands[c.name] = c }

// inputError marks bad input: exit status 2.
type inputError struct{ err error }

func (e *inputError) Error() string { return e.err.Error() }
func (e *inputError) Unwrap() error { return e.err }

// badInput wraps err as bad input.
func badInput(err error) error {
	if err == nil {
		return nil
	}
	return &inputError{err}
}

// badInputf formats a bad-input error.
func badInputf(format string, args ...any) error { return &inputError{fmt.Errorf(format, args...)} }

// exitCode maps an error to the process exit status.
func exitCode(err error) int {
	var ie *inputError
	switch {
	case err == nil:
		return 0
	case errors.Is(err, flag.ErrHelp):
		return 0
	case errors.As(err, &ie):
		return 2
	}
	return 1
}

func usage(w io.Writer) {
	fmt.Fprintln(w, "usage: stickslip COMMAND [flags] [args]")
	fmt.Fprintln(w, "\ncommands:")
	names := make([]string, 0, len(commands))
	for n := range commands {
		names = append(names, n)
	}
	sort.Strings(names)
	for _, n := range names {
		fmt.Fprintf(w, "  %-10s %s\n", n, commands[n].summary)
	}
	fmt.Fprintln(w, "\nRun 'stickslip COMMAND -h' for a command's flags.")
}

func run(e *env, args []string) int {
	if len(args) == 0 || args[0] == "-h" || args[0] == "--help" || args[0] == "help" {
		usage(e.stdout)
		if len(args) == 0 {
			return 2
		}
		return 0
	}
	c, ok := commands[args[0]]
	if !ok {
		fmt.Fprintf(e.stderr, "stickslip: unknown command %q\n", args[0])
		usage(e.stderr)
		return 2
	}
	err := c.run(e, args[1:])
	if err != nil && !errors.Is(err, flag.ErrHelp) {
		fmt.Fprintf(e.stderr, "stickslip %s: %v\n", c.name, err)
	}
	return exitCode(err)
}

// newFlags returns a flag set whose parse errors count as bad input.
func newFlags(e *env, name, synopsis string) *flag.FlagSet {
	fs := flag.NewFlagSet(name, flag.ContinueOnError)
	fs.SetOutput(e.stderr)
	fs.Usage = func() {
		fmt.Fprintf(e.stderr, "usage: stickslip %s %s\n\nflags:\n", name, synopsis)
		fs.PrintDefaults()
	}
	return fs
}

// parseFlags parses args, marking failures as bad input. Flags may come
// before or after the positional arguments.
func parseFlags(fs *flag.FlagSet, args []string) error {
	if err := fs.Parse(flagsFirst(fs, args)); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return err
		}
		return badInput(err)
	}
	return nil
}

func main() {
	os.Exit(run(&env{stdout: os.Stdout, stderr: os.Stderr}, os.Args[1:]))
}

// flagsFirst reorders args so that flags precede positional arguments, as
// the flag package expects, keeping each flag with its value.
func flagsFirst(fs *flag.FlagSet, args []string) []string {
	var flags, pos []string
	for i := 0; i < len(args); i++ {
		a := args[i]
		if a == "--" {
			pos = append(pos, args[i+1:]...)
			break
		}
		if len(a) < 2 || a[0] != '-' {
			pos = append(pos, a)
			continue
		}
		flags = append(flags, a)
		name := strings.TrimLeft(a, "-")
		if strings.Contains(name, "=") {
			continue
		}
		f := fs.Lookup(name)
		if f == nil {
			continue // the parse reports it
		}
		if b, ok := f.Value.(interface{ IsBoolFlag() bool }); ok && b.IsBoolFlag() {
			continue
		}
		if i+1 < len(args) {
			i++
			flags = append(flags, args[i])
		}
	}
	return append(append(flags, "--"), pos...)
}
