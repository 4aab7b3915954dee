package main

import (
	"bytes"
	"strings"
	"testing"
)

func TestParseFlags(t *testing.T) {
	o, err := parseFlags(nil, &bytes.Buffer{})
	if err != nil {
		t.Fatal(err)
	}
	if !strings.HasPrefix(o.listen, "127.0.0.1:") || o.logFormat != "json" || o.tlsCert != "" {
		t.Errorf("defaults: %+v", o)
	}
	bad := []struct {
		args []string
		want string
	}{
		{[]string{"-tls-cert", "c.pem"}, "-tls-cert and -tls-key"},
		{[]string{"-client-ca", "ca.pem"}, "-client-ca needs"},
		{[]string{"extra"}, "unexpected arguments"},
		{[]string{"-max-cost", "x"}, "invalid value"},
	}
	for _, c := range bad {
		if _, err := parseFlags(c.args, &bytes.Buffer{}); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%v: error %v, want %q", c.args, err, c.want)
		}
	}
}

func TestLoggerAndTLSErrors(t *testing.T) {
	if _, err := newLogger("loud", "json", &bytes.Buffer{}); err == nil {
		t.Error("bad level accepted")
	}
	if _, err := newLogger("info", "xml", &bytes.Buffer{}); err == nil {
		t.Error("bad format accepted")
	}
	if tc, err := tlsConfig("", "", ""); tc != nil || err != nil {
		t.Errorf("no TLS: %v %v", tc, err)
	}
	if _, err := tlsConfig("/nonexistent/c.pem", "/nonexistent/k.pem", ""); err == nil {
		t.Error("missing key pair accepted")
	}
}

func TestRunRejectsBadListenAddress(t *testing.T) {
	err := run([]string{"-listen", "256.0.0.1:1", "-metrics-listen", ""}, &bytes.Buffer{})
	if err == nil || !strings.Contains(err.Error(), "listen") {
		t.Errorf("run with a bad address: %v", err)
	}
}
