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
//	fadeloop completion bash > /etc/bash_completion.d/fadeloop
//	fadeloop man ./man1
//
// Commands, help, shell completion and man pages come from
// github.com/spf13/cobra; every command's flags may also be set through
// the environment (see envPrefix).
//
// Exit status: 0 success; 2 bad input (every problem printed as
// "path: rule", with the file and line for scenario files); 3 server
// unreachable; 4 tune or capacity found no candidate meeting the
// constraints (the report is still written); 1 anything else, including a
// run cancelled with Ctrl-C.
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

	"github.com/spf13/cobra"
	"github.com/spf13/pflag"

	"github.com/fadeloop/fadeloop/client/render"
	"github.com/fadeloop/fadeloop/loop"
)

// cautionHelp is loop.Caution wrapped for the help texts (root, sweep,
// serve): the one wording of the caution about real transmitters.
var cautionHelp = render.Wrap(loop.Caution, 78, "")

// Exit codes.
const (
	exitOK          = 0
	exitFailure     = 1
	exitBadInput    = 2
	exitUnreachable = 3
	// exitConstraintsUnmet: tune or capacity ran, but no candidate meets
	// the constraints (Recommendation.constraints_unmet); the report is
	// written as usual.
	exitConstraintsUnmet = 4
)

// envPrefix starts the environment variable of every flag: FADELOOP_ and
// the flag name in upper case with '-' turned into '_' (--tls-ca:
// FADELOOP_TLS_CA). A flag given on the command line wins over the
// variable.
const envPrefix = "FADELOOP_"

// envName is the environment variable that may set flag name.
func envName(flagName string) string {
	return envPrefix + strings.ToUpper(strings.ReplaceAll(flagName, "-", "_"))
}

// action runs a command on its positional arguments, after its flags
// (bound when the command was built) have been parsed.
type action func(ctx context.Context, args []string) error

// command is one subcommand.
type command struct {
	order   int // position in the command list
	name    string
	summary string
	usage   string // argument synopsis after the command name
	details string // description and examples, printed by --help
	// run binds the command's own flags into fs and returns what to do
	// once they are parsed.
	run func(e *env, fs *flag.FlagSet) action
}

var commands []*command

func register(c *command) { commands = append(commands, c) }

// env is what every command gets: output streams and the global options.
type env struct {
	stdout, stderr io.Writer
	g              *globals
	given          map[string]bool // flags set on the command line or from the environment
}

// flagGiven reports whether flag name was set on the command line or from
// its environment variable.
func (e *env) flagGiven(name string) bool { return e.given[name] }

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	code := run(ctx, os.Args[1:], os.Stdout, os.Stderr)
	stop()
	os.Exit(code)
}

// run is the whole program; it returns the exit status.
func run(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	e := &env{stdout: stdout, stderr: stderr, g: &globals{}}
	root := newRoot(e)
	root.SetArgs(doubleDash(root, args))
	root.SetOut(stdout)
	root.SetErr(stderr)
	c, err := root.ExecuteContextC(ctx)
	name := ""
	if c != nil && c != root {
		name = c.Name()
	}
	return report(stderr, name, err)
}

// doubleDash rewrites single-dash long flags (-slots 3000, -format=csv),
// which the earlier flag parser read, to the double-dash form; arguments
// after "--" and single letters (-h) stay as they are.
func doubleDash(root *cobra.Command, args []string) []string {
	names := map[string]bool{}
	var walk func(c *cobra.Command)
	walk = func(c *cobra.Command) {
		c.Flags().VisitAll(func(f *pflag.Flag) { names[f.Name] = true })
		c.PersistentFlags().VisitAll(func(f *pflag.Flag) { names[f.Name] = true })
		for _, sub := range c.Commands() {
			walk(sub)
		}
	}
	walk(root)
	out := make([]string, len(args))
	for i, a := range args {
		out[i] = a
		if a == "--" {
			copy(out[i:], args[i:])
			break
		}
		name, _, _ := strings.Cut(strings.TrimPrefix(a, "-"), "=")
		if len(a) > 2 && a[0] == '-' && a[1] != '-' && len(name) > 1 && names[name] {
			out[i] = "-" + a
		}
	}
	return out
}

// newRoot builds the command tree: every registered command, completion
// (from cobra) and man.
func newRoot(e *env) *cobra.Command {
	cobra.EnableCommandSorting = false
	root := &cobra.Command{
		Use:   "fadeloop [global flags] <command> [flags] [arguments]",
		Short: "uplink power-control simulation against a fadeloop server or an embedded one",
		Long: `fadeloop simulates uplink transmit power control (inner and outer loop) over
fading channels with near-far users, against a fadeloop server or an
embedded one.

` + cautionHelp + `

Environment: every flag may also be set as FADELOOP_ followed by its name in
upper case with '-' turned into '_' (FADELOOP_SERVER, FADELOOP_FORMAT,
FADELOOP_TIMEOUT, FADELOOP_TLS_CA, ...). A flag on the command line wins.

Exit status: 0 success; 2 bad input; 3 server unreachable; 4 tune or
capacity found no candidate meeting the constraints (report still written);
1 otherwise (including a call cancelled with Ctrl-C).`,
		Version:           versionString(),
		SilenceErrors:     true,
		SilenceUsage:      true,
		Args:              cobra.ArbitraryArgs,
		PersistentPreRunE: func(c *cobra.Command, _ []string) error { return applyEnv(c.Flags()) },
		RunE: func(c *cobra.Command, args []string) error {
			if len(args) > 0 {
				return badInputf("unknown command %q (commands: %s)", args[0], commandNames())
			}
			// No command: the usage on standard error, exit 2.
			c.SetOut(e.stderr)
			c.Usage()
			return badInputf("no command given")
		},
	}
	root.SetVersionTemplate("fadeloop {{.Version}}\n")
	root.SetUsageTemplate(usageTemplate)
	root.SetHelpTemplate(helpTemplate)
	root.SetFlagErrorFunc(func(_ *cobra.Command, err error) error { return badInput{err} })
	gfs := flag.NewFlagSet("fadeloop", flag.ContinueOnError)
	e.g.register(gfs)
	root.PersistentFlags().AddGoFlagSet(gfs)
	oneDefault(root.PersistentFlags())

	for _, c := range sortedCommands() {
		fs := flag.NewFlagSet(c.name, flag.ContinueOnError)
		act := c.run(e, fs)
		use := c.name + " [flags]"
		if c.usage != "" {
			use += " " + c.usage
		}
		cc := &cobra.Command{
			Use:   use,
			Short: c.summary,
			Long:  strings.TrimSpace(c.summary) + "\n\n" + strings.TrimRight(c.details, "\n"),
			RunE: func(cc *cobra.Command, args []string) error {
				e.given = map[string]bool{}
				cc.Flags().Visit(func(f *pflag.Flag) { e.given[f.Name] = true })
				return act(cc.Context(), args)
			},
		}
		cc.Flags().AddGoFlagSet(fs)
		oneDefault(cc.Flags())
		root.AddCommand(cc)
	}
	root.AddCommand(newManCommand(root))
	return root
}

// oneDefault keeps --help from showing two defaults for one flag: a flag
// whose description already says what its default or its zero value
// means ("(0: none)", "table (the default)", "(default: ...)") gets no
// generated "(default …)" after it (pflag prints one for every value it
// does not recognise as zero, such as a duration's "0s"). Only the help
// text changes: the flag's value is untouched.
func oneDefault(fs *pflag.FlagSet) {
	fs.VisitAll(func(f *pflag.Flag) {
		u := f.Usage
		if strings.Contains(u, "(0: ") || strings.Contains(u, "(the default") || strings.Contains(u, "(its default") ||
			strings.Contains(u, "(default ") || strings.Contains(u, "(default:") {
			f.DefValue = ""
		}
	})
}

// applyEnv sets every flag not given on the command line from its
// environment variable (see envName), if that is set.
func applyEnv(fs *pflag.FlagSet) error {
	var err error
	fs.VisitAll(func(f *pflag.Flag) {
		if err != nil || f.Changed || f.Name == "help" || f.Name == "version" {
			return
		}
		v, ok := os.LookupEnv(envName(f.Name))
		if !ok {
			return
		}
		if e := fs.Set(f.Name, v); e != nil {
			err = badInputf("%s=%q (for --%s): %v", envName(f.Name), v, f.Name, e)
		}
	})
	return err
}

// helpTemplate is the --help layout of every command: usage line,
// description with examples, subcommands, own flags, global flags.
const helpTemplate = "Usage: {{.UseLine}}{{with .Long}}\n\n{{.}}{{end}}" + flagsTemplate

// usageTemplate is helpTemplate without the description.
const usageTemplate = "Usage: {{.UseLine}}" + flagsTemplate

const flagsTemplate = `{{if .HasAvailableSubCommands}}

Commands:
{{range .Commands}}{{if (or .IsAvailableCommand (eq .Name "help"))}}  {{rpad .Name .NamePadding }} {{.Short}}
{{end}}{{end}}{{end}}{{if .HasParent}}{{if .HasAvailableLocalFlags}}

Flags:
{{.LocalFlags.FlagUsagesWrapped 80 | trimTrailingWhitespaces}}{{end}}{{if .HasAvailableInheritedFlags}}

Global flags:
{{.InheritedFlags.FlagUsagesWrapped 80 | trimTrailingWhitespaces}}{{end}}{{else}}

Global flags (also accepted after the command):
{{.LocalFlags.FlagUsagesWrapped 80 | trimTrailingWhitespaces}}

Run "fadeloop <command> --help" for a command's flags and examples.{{end}}
`

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
	return strings.Join(append(n, "completion", "man", "help"), ", ")
}

// badInput marks an error as the user's input (exit 2).
type badInput struct{ err error }

func (b badInput) Error() string { return b.err.Error() }
func (b badInput) Unwrap() error { return b.err }

func badInputf(format string, a ...any) error { return badInput{fmt.Errorf(format, a...)} }

func isBadInput(err error) bool {
	var bi badInput
	return errors.As(err, &bi)
}
