// Command fadeloop is the command-line tool of fadeloop: it runs uplink
// power-control simulations, sweeps and channel checks against a fadeloop
// server, or, when no --server address is given, against a server started
// inside the process (embedded mode, no port opened).
//
//	fadeloop run                       # the embedded default scenario
//	fadeloop run cell.yaml --plot traces=cell.png
//	fadeloop sweep cell.yaml --axis inner_loop.step_db=0.5,1,2 --format csv --out steps.csv
//	fadeloop check --speed-kmh 120 --profile EVA
//	fadeloop serve --listen 127.0.0.1:7443
//
// Exit status: 0 success; 2 bad input (every problem printed as
// "path: rule", with the file and line for scenario files); 3 server
// unreachable; 1 anything else, including a run cancelled with Ctrl-C.
package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"os/signal"
	"sort"
	"strings"
	"syscall"
)

// Exit codes.
const (
	exitOK          = 0
	exitFailure     = 1
	exitBadInput    = 2
	exitUnreachable = 3
)

// command is one subcommand.
type command struct {
	order   int // position in the command list
	name    string
	summary string
	usage   string // argument synopsis after the command name
	details string // description and examples, printed by --help
	run     func(ctx context.Context, env *env, args []string) error
}

var commands []*command

func register(c *command) { commands = append(commands, c) }

func lookup(name string) *command {
	for _, c := range commands {
		if c.name == name {
			return c
		}
	}
	return nil
}

// env is what every command gets: output streams and the global options.
type env struct {
	stdout, stderr io.Writer
	g              *globals
}

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	code := run(ctx, os.Args[1:], os.Stdout, os.Stderr)
	stop()
	os.Exit(code)
}

// run is the whole program; it returns the exit status.
func run(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	g := &globals{}
	fs := flag.NewFlagSet("fadeloop", flag.ContinueOnError)
	fs.SetOutput(stderr)
	g.register(fs)
	fs.Usage = func() {}
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			mainUsage(stdout, fs)
			return exitOK
		}
		fmt.Fprintln(stderr, `run "fadeloop --help" for the commands and flags`)
		return exitBadInput
	}
	rest := fs.Args()
	if len(rest) == 0 {
		mainUsage(stderr, fs)
		return exitBadInput
	}
	name := rest[0]
	if name == "help" {
		if len(rest) > 1 {
			if c := lookup(rest[1]); c != nil {
				return run(ctx, []string{c.name, "--help"}, stdout, stderr)
			}
		}
		mainUsage(stdout, fs)
		return exitOK
	}
	c := lookup(name)
	if c == nil {
		fmt.Fprintf(stderr, "fadeloop: unknown command %q (commands: %s)\n", name, commandNames())
		return exitBadInput
	}
	e := &env{stdout: stdout, stderr: stderr, g: g}
	err := c.run(ctx, e, rest[1:])
	return report(stderr, c.name, err)
}

// sortedCommands lists the commands in their documented order.
func sortedCommands() []*command {
	cs := append([]*command(nil), commands...)
	sort.SliceStable(cs, func(i, j int) bool { return cs[i].order < cs[j].order })
	return cs
}

func commandNames() string {
	var n []string
	for _, c := range sortedCommands() {
		n = append(n, c.name)
	}
	return strings.Join(n, ", ")
}

func mainUsage(w io.Writer, fs *flag.FlagSet) {
	fmt.Fprintf(w, `fadeloop simulates uplink transmit power control (inner and outer loop) over
fading channels with near-far users, against a fadeloop server or an
embedded one.

Usage: fadeloop [global flags] <command> [flags] [arguments]

Commands:
`)
	for _, c := range sortedCommands() {
		fmt.Fprintf(w, "  %-9s %s\n", c.name, c.summary)
	}
	fmt.Fprintf(w, "\nGlobal flags (also accepted after the command):\n")
	printFlags(w, fs)
	fmt.Fprintf(w, `
Run "fadeloop <command> --help" for a command's flags and examples.

Exit status: 0 success; 2 bad input; 3 server unreachable; 1 otherwise
(including a call cancelled with Ctrl-C).
`)
}

// printFlags prints a flag set's flags with two leading dashes, the usage
// text wrapped at 80 columns.
func printFlags(w io.Writer, fs *flag.FlagSet) {
	const col = 25
	fs.VisitAll(func(f *flag.Flag) {
		name, usage := flag.UnquoteUsage(f)
		line := "  --" + f.Name
		if name != "" {
			line += " " + name
		}
		if len(line) < col-1 {
			line += strings.Repeat(" ", col-len(line))
		} else {
			line += "\n" + strings.Repeat(" ", col)
		}
		if f.DefValue != "" && f.DefValue != "false" && f.DefValue != "0" && f.DefValue != "0s" && f.DefValue != "[]" {
			usage += fmt.Sprintf(" (default %s)", f.DefValue)
		}
		line += wrap(usage, 80-col, strings.Repeat(" ", col))
		fmt.Fprintln(w, line)
	})
}

// wrap breaks text into lines of at most width runes (words are not
// split), joining them with a newline and indent; existing newlines stay.
func wrap(text string, width int, indent string) string {
	var out []string
	for _, para := range strings.Split(text, "\n") {
		line := ""
		for _, word := range strings.Fields(para) {
			if line != "" && len([]rune(line))+1+len([]rune(word)) > width {
				out = append(out, line)
				line = word
				continue
			}
			if line != "" {
				line += " "
			}
			line += word
		}
		out = append(out, line)
	}
	return strings.Join(out, "\n"+indent)
}

// newFlagSet makes a command's flag set with the global flags included and
// a --help text built from the command's usage and details.
func (e *env) newFlagSet(c *command) *flag.FlagSet {
	fs := flag.NewFlagSet(c.name, flag.ContinueOnError)
	fs.SetOutput(e.stderr)
	fs.Usage = func() {
		w := e.stdout
		fmt.Fprintf(w, "Usage: fadeloop %s [flags] %s\n\n%s\n", c.name, c.usage, strings.TrimSpace(c.summary))
		if c.details != "" {
			fmt.Fprintf(w, "\n%s\n", strings.TrimRight(c.details, "\n"))
		}
		own := flag.NewFlagSet("", flag.ContinueOnError)
		glob := flag.NewFlagSet("", flag.ContinueOnError)
		fs.VisitAll(func(f *flag.Flag) {
			if globalFlagNames[f.Name] {
				glob.Var(f.Value, f.Name, f.Usage)
			} else {
				own.Var(f.Value, f.Name, f.Usage)
			}
		})
		if own.NFlag() >= 0 {
			n := 0
			own.VisitAll(func(*flag.Flag) { n++ })
			if n > 0 {
				fmt.Fprintf(w, "\nFlags:\n")
				printFlagsDefaults(w, own, fs)
			}
		}
		fmt.Fprintf(w, "\nGlobal flags:\n")
		printFlagsDefaults(w, glob, fs)
	}
	e.g.register(fs)
	return fs
}

// printFlagsDefaults prints sub's flags with the defaults recorded in full.
func printFlagsDefaults(w io.Writer, sub, full *flag.FlagSet) {
	sub.VisitAll(func(f *flag.Flag) {
		if orig := full.Lookup(f.Name); orig != nil {
			f.DefValue = orig.DefValue
		}
	})
	printFlags(w, sub)
}

// parseFlags parses a command's flags, allowing flags and arguments in any
// order ("run cell.yaml --slots 3000" and "run --slots 3000 cell.yaml").
func parseFlags(fs *flag.FlagSet, args []string) ([]string, error) {
	var positional []string
	for {
		if err := fs.Parse(args); err != nil {
			if errors.Is(err, flag.ErrHelp) {
				return nil, errHelp
			}
			return nil, badInput{err}
		}
		args = fs.Args()
		if len(args) == 0 {
			return positional, nil
		}
		if args[0] == "--" {
			return append(positional, args[1:]...), nil
		}
		positional = append(positional, args[0])
		args = args[1:]
	}
}

// errHelp: --help was asked for and printed.
var errHelp = errors.New("help printed")

// badInput marks an error as the user's input (exit 2).
type badInput struct{ err error }

func (b badInput) Error() string { return b.err.Error() }
func (b badInput) Unwrap() error { return b.err }

func badInputf(format string, a ...any) error { return badInput{fmt.Errorf(format, a...)} }
