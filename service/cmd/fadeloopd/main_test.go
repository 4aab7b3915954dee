package main

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/fadeloop/fadeloop/service"
)

// env returns a getenv over m.
func env(m map[string]string) func(string) (string, bool) {
	return func(k string) (string, bool) { v, ok := m[k]; return v, ok }
}

func TestParseFlags(t *testing.T) {
	d, err := parseFlags(nil, &bytes.Buffer{}, env(nil))
	if err != nil {
		t.Fatal(err)
	}
	if !strings.HasPrefix(d.Listen, "127.0.0.1:") || d.LogFormat != "json" || d.TLSCert != "" || !d.Reflection {
		t.Errorf("defaults: %+v", d)
	}
	bad := []struct {
		args []string
		env  map[string]string
		want string
	}{
		{[]string{"-tls-cert", "c.pem"}, nil, "-tls-cert and -tls-key"},
		{[]string{"-client-ca", "ca.pem"}, nil, "-client-ca needs"},
		{[]string{"extra"}, nil, "unexpected arguments"},
		{[]string{"-max-cost", "x"}, nil, "invalid value"},
		{nil, map[string]string{"FADELOOPD_MAX_COST": "lots"}, "FADELOOPD_MAX_COST"},
		{nil, map[string]string{"FADELOOPD_STREAM_IDLE_TIMEOUT": "5"}, "FADELOOPD_STREAM_IDLE_TIMEOUT"},
		{[]string{"-pprof-listen", "0.0.0.0:6060"}, nil, "not a loopback address"},
		{[]string{"-pprof-listen", ":6060"}, nil, "not a loopback address"},
		{nil, map[string]string{"FADELOOPD_PPROF_LISTEN": "10.1.2.3:6060"}, "not a loopback address"},
	}
	for _, c := range bad {
		if _, err := parseFlags(c.args, &bytes.Buffer{}, env(c.env)); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%v %v: error %v, want %q", c.args, c.env, err, c.want)
		}
	}
}

// Configuration from environment variables: each flag's FADELOOPD_*
// variable sets it; a flag on the command line wins.
func TestEnvironmentVariables(t *testing.T) {
	d, err := parseFlags([]string{"-max-concurrent-runs", "3"}, &bytes.Buffer{}, env(map[string]string{
		"FADELOOPD_LISTEN":              "127.0.0.1:9999",
		"FADELOOPD_MAX_CONCURRENT_RUNS": "7",
		"FADELOOPD_DRAIN_NOTICE":        "5s",
		"FADELOOPD_REFLECTION":          "false",
		"FADELOOPD_PPROF_LISTEN":        "127.0.0.1:0",
		"FADELOOPD_LOG_FORMAT":          "text",
	}))
	if err != nil {
		t.Fatal(err)
	}
	if d.Listen != "127.0.0.1:9999" || d.MaxConcurrentRuns != 3 || d.DrainNotice != 5*time.Second ||
		d.Reflection || d.PprofListen != "127.0.0.1:0" || d.LogFormat != "text" {
		t.Errorf("got %+v", d)
	}
	cfg, err := d.Config(nil, env(nil))
	if err != nil {
		t.Fatal(err)
	}
	if !cfg.DisableReflection || cfg.DrainNotice != 5*time.Second || cfg.MaxConcurrentRuns != 3 {
		t.Errorf("config %+v", cfg)
	}
}

// The token comes from a file or from FADELOOPD_AUTH_TOKEN, never from a
// flag value (which would show in the process list).
func TestAuthTokenSources(t *testing.T) {
	dir := t.TempDir()
	file := filepath.Join(dir, "token")
	if err := os.WriteFile(file, []byte("  from-file\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	empty := filepath.Join(dir, "empty")
	if err := os.WriteFile(empty, nil, 0o600); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		args []string
		env  map[string]string
		want string
		err  string
	}{
		{nil, nil, "", ""},
		{nil, map[string]string{service.EnvAuthToken: "from-env"}, "from-env", ""},
		{[]string{"-auth-token-file", file}, map[string]string{service.EnvAuthToken: "from-env"}, "from-file", ""},
		{[]string{"-auth-token-file", empty}, nil, "", "is empty"},
		{[]string{"-auth-token-file", filepath.Join(dir, "none")}, nil, "", "-auth-token-file"},
		{nil, map[string]string{service.EnvAuthToken: " "}, "", "set but empty"},
	} {
		d, err := parseFlags(c.args, &bytes.Buffer{}, env(c.env))
		if err != nil {
			t.Fatal(err)
		}
		cfg, err := d.Config(nil, env(c.env))
		if c.err != "" {
			if err == nil || !strings.Contains(err.Error(), c.err) {
				t.Errorf("%v: error %v, want %q", c.args, err, c.err)
			}
			continue
		}
		if err != nil || cfg.AuthToken != c.want {
			t.Errorf("%v %v: token %q, %v; want %q", c.args, c.env, cfg.AuthToken, err, c.want)
		}
	}
}

func TestLoggerErrors(t *testing.T) {
	d := service.NewDaemonFlags()
	d.LogLevel = "loud"
	if _, err := d.Logger(&bytes.Buffer{}); err == nil {
		t.Error("bad level accepted")
	}
	d = service.NewDaemonFlags()
	d.LogFormat = "xml"
	if _, err := d.Logger(&bytes.Buffer{}); err == nil {
		t.Error("bad format accepted")
	}
}

func TestRunRejectsBadListenAddress(t *testing.T) {
	err := run([]string{"-listen", "256.0.0.1:1", "-metrics-listen", ""}, &bytes.Buffer{})
	if err == nil || !strings.Contains(err.Error(), "listen") {
		t.Errorf("run with a bad address: %v", err)
	}
}
