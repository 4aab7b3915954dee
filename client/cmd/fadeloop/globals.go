package main

import (
	"bufio"
	"errors"
	"flag"
	"fmt"
	"io"
	"log/slog"
	"os"
	"path/filepath"
	"strings"
	"time"

	"github.com/fadeloop/fadeloop/client"
	"github.com/fadeloop/fadeloop/client/render"
	"github.com/fadeloop/fadeloop/service"
)

// globals are the flags every command accepts.
type globals struct {
	server   string
	tls      client.TLSOptions
	format   string
	out      string
	quiet    bool
	timeout  time.Duration
	progress string
	// tokenFile names the file of the bearer token sent with every call
	// (--auth-token-file).
	tokenFile string
}

// register binds the global flags into fs (the top-level set and every
// command's set share the same variables, so they may come before or after
// the command name).
func (g *globals) register(fs *flag.FlagSet) {
	if g.format == "" {
		g.format = "table"
	}
	if g.progress == "" {
		g.progress = "auto"
	}
	fs.StringVar(&g.server, "server", g.server, "fadeloop server `ADDR` (host:port or a gRPC target such as dns:///name:port);\nabsent: run an embedded server inside this process")
	fs.BoolVar(&g.tls.Enabled, "tls", g.tls.Enabled, "use TLS to the server, checked against the system roots")
	fs.StringVar(&g.tls.CAFile, "tls-ca", g.tls.CAFile, "PEM `FILE` of CAs that sign the server certificate (implies --tls)")
	fs.StringVar(&g.tls.CertFile, "tls-cert", g.tls.CertFile, "client certificate PEM `FILE` for mutual TLS (with --tls-key)")
	fs.StringVar(&g.tls.KeyFile, "tls-key", g.tls.KeyFile, "client key PEM `FILE` for mutual TLS (with --tls-cert)")
	fs.StringVar(&g.tls.ServerName, "tls-server-name", g.tls.ServerName, "`NAME` to check in the server certificate instead of the host")
	fs.StringVar(&g.tokenFile, "auth-token-file", g.tokenFile, "`FILE` holding the bearer token the server requires (fadeloopd -auth-token-file); never printed")
	fs.StringVar(&g.format, "format", g.format, "output `FORMAT`: table (the default), csv or json, as the command's \"Output formats\" list; example: yaml (its default) or json")
	fs.StringVar(&g.out, "out", g.out, "write the output to `FILE` instead of standard output")
	fs.BoolVar(&g.quiet, "quiet", g.quiet, "no progress output on standard error")
	fs.DurationVar(&g.timeout, "timeout", g.timeout, "deadline of each call as a `DURATION`, e.g. 90s or 10m (0: none)")
	fs.StringVar(&g.progress, "progress", g.progress, "progress display `MODE`: auto (a bar on a terminal, lines otherwise), bar, lines or none")
}

func (g *globals) checkFormat(allowed ...string) error {
	for _, a := range allowed {
		if g.format == a {
			return nil
		}
	}
	return badInputf("--format %q: must be one of %v", g.format, allowed)
}

// connect opens the client: remote with --server, embedded otherwise.
func (e *env) connect() (*client.Client, error) {
	opts := client.Options{TLS: e.g.tls, CallTimeout: e.g.timeout}
	if e.g.tokenFile != "" {
		b, err := os.ReadFile(e.g.tokenFile)
		if err != nil {
			return nil, badInputf("--auth-token-file: %v", err)
		}
		opts.BearerToken = strings.TrimSpace(string(b))
		if opts.BearerToken == "" {
			return nil, badInputf("--auth-token-file %s: the file is empty", e.g.tokenFile)
		}
		if e.g.server == "" {
			return nil, badInputf("--auth-token-file needs --server (the embedded server has no token)")
		}
	}
	if e.g.server == "" {
		if e.g.tls != (client.TLSOptions{}) {
			return nil, badInputf("TLS flags need --server (the embedded server is in-process)")
		}
		// The embedded server's call log is not shown: every failed call
		// is reported by the command itself.
		logger := slog.New(slog.DiscardHandler)
		return client.Embedded(service.Config{Logger: logger}, opts)
	}
	c, err := client.Dial(e.g.server, opts)
	if err != nil {
		if _, tlsErr := e.g.tls.Config(); tlsErr != nil {
			return nil, badInput{tlsErr}
		}
		return nil, unreachable{err}
	}
	return c, nil
}

// unreachable marks an error as "server unreachable" (exit 3).
type unreachable struct{ err error }

func (u unreachable) Error() string { return u.err.Error() }
func (u unreachable) Unwrap() error { return u.err }

// output opens the destination of the command's result: --out FILE (written
// to a temporary file beside it and renamed on success) or stdout.
type output struct {
	w      *bufio.Writer
	f      *os.File
	final  string
	closed bool
}

// session opens the command's output (see openOutput) and connects to the
// server, or to an embedded one (see connect). release closes the client and
// discards the output unless it was committed; callers defer it.
func (e *env) session() (out *output, cl *client.Client, release func(), err error) {
	out, err = e.openOutput()
	if err != nil {
		return nil, nil, nil, err
	}
	cl, err = e.connect()
	if err != nil {
		out.discard()
		return nil, nil, nil, err
	}
	return out, cl, func() { cl.Close(); out.discard() }, nil
}

func (e *env) openOutput() (*output, error) {
	if e.g.out == "" || e.g.out == "-" {
		return &output{w: bufio.NewWriter(e.stdout)}, nil
	}
	dir := filepath.Dir(e.g.out)
	f, err := os.CreateTemp(dir, "."+filepath.Base(e.g.out)+".*")
	if err != nil {
		return nil, badInputf("--out %s: %v", e.g.out, err)
	}
	return &output{w: bufio.NewWriter(f), f: f, final: e.g.out}, nil
}

// Writer is where to write.
func (o *output) Writer() io.Writer { return o.w }

// commit flushes and, for a file, renames it into place.
func (o *output) commit() error {
	o.closed = true
	if err := o.w.Flush(); err != nil {
		return err
	}
	if o.f == nil {
		return nil
	}
	// CreateTemp makes the file private; the result is an ordinary file.
	if err := o.f.Chmod(0o644); err != nil {
		return err
	}
	if err := o.f.Close(); err != nil {
		return err
	}
	return os.Rename(o.f.Name(), o.final)
}

// discard removes a partial file (on error).
func (o *output) discard() {
	if o.closed || o.f == nil {
		return
	}
	o.closed = true
	o.f.Close()
	os.Remove(o.f.Name())
}

// flagOfField names, per command, the flag that sets a request field, so
// that a rule the request breaks there also names the flag (the value may
// come from a --request file too, so the field keeps its name).
var flagOfField = map[string]map[string]string{
	"tune": {
		"budget.min_replications":     "--min-reps",
		"budget.max_replications":     "--max-reps",
		"budget.batch_replications":   "--batch-reps",
		"budget.max_user_slots":       "--max-user-slots",
		"objective.outage_limit":      "--outage-limit",
		"objective.bler_tolerance":    "--bler-tolerance",
		"objective.indifference_zone": "--indifference",
		"confidence":                  "--confidence",
	},
	"capacity": {
		"group":          "--group",
		"outage_limit":   "--outage-limit",
		"min_count":      "--min-count",
		"max_count":      "--max-count",
		"replications":   "--replications",
		"confidence":     "--confidence",
		"max_user_slots": "--max-user-slots",
	},
}

// report prints err for a person and returns the exit status.
func report(stderr io.Writer, cmd string, err error) int {
	if err == nil {
		return exitOK
	}
	prefix := "fadeloop " + cmd
	if cmd == "" {
		prefix = "fadeloop"
	}
	var cu constraintsUnmet
	if errors.As(err, &cu) {
		fmt.Fprintf(stderr, "%s: no candidate meets the constraints: %s\n", prefix, cu.reason)
		return exitConstraintsUnmet
	}
	var sfe *client.ScenarioFileError
	if errors.As(err, &sfe) {
		fmt.Fprintln(stderr, sfe.Error())
		where := sfe.File
		flags := 0
		for _, v := range sfe.Violations {
			if v.Source != "" {
				flags++
			}
		}
		switch {
		case flags == len(sfe.Violations):
			where = "the command line"
		case flags > 0:
			where += " and the command line"
		}
		fmt.Fprintf(stderr, "%s: %s in %s\n", prefix, render.Count(len(sfe.Violations), "problem", "problems"), where)
		return exitBadInput
	}
	if inv, ok := client.AsInvalidInput(err); ok {
		for _, v := range inv.Violations {
			// A request field a flag sets is named with its flag.
			if flag := flagOfField[cmd][v.Field]; flag != "" {
				v.Field += " (" + flag + ")"
			}
			fmt.Fprintln(stderr, v.String())
		}
		if len(inv.Violations) == 0 {
			fmt.Fprintln(stderr, inv.Message)
		}
		fmt.Fprintf(stderr, "%s: the request is not valid (%s)\n", prefix, render.Count(max(1, len(inv.Violations)), "problem", "problems"))
		return exitBadInput
	}
	var bi badInput
	if errors.As(err, &bi) {
		fmt.Fprintf(stderr, "%s: %v\n", prefix, bi.err)
		return exitBadInput
	}
	if client.IsCanceled(err) {
		fmt.Fprintf(stderr, "%s: cancelled\n", prefix)
		return exitFailure
	}
	var un unreachable
	if errors.As(err, &un) || client.IsUnreachable(err) {
		fmt.Fprintf(stderr, "%s: server unreachable: %s\n", prefix, client.Describe(err))
		return exitUnreachable
	}
	fmt.Fprintf(stderr, "%s: %s\n", prefix, client.Describe(err))
	return exitFailure
}

// constraintsUnmet: the search ran and its report was written, but no
// candidate meets the constraints (exit 4).
type constraintsUnmet struct{ reason string }

func (c constraintsUnmet) Error() string { return "no candidate meets the constraints: " + c.reason }
