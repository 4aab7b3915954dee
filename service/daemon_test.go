package service

import (
	"context"
	"log/slog"
	"strings"
	"testing"
	"time"
)

func TestRunDaemonServesThenDrains(t *testing.T) {
	var logs syncBuffer
	srv, err := NewServer(Config{Logger: slog.New(slog.NewTextHandler(&logs, nil))})
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() {
		done <- RunDaemon(ctx, context.Background(), srv, DaemonOptions{Listen: "127.0.0.1:0", MetricsListen: "127.0.0.1:0", DrainTimeout: 5 * time.Second})
	}()
	deadline := time.Now().Add(5 * time.Second)
	for !strings.Contains(logs.String(), "grpc_addr=127.0.0.1:") {
		if time.Now().After(deadline) {
			t.Fatalf("no listening line in the log:\n%s", logs.String())
		}
		time.Sleep(10 * time.Millisecond)
	}
	cancel()
	select {
	case err := <-done:
		if err != nil {
			t.Fatalf("RunDaemon: %v", err)
		}
	case <-time.After(10 * time.Second):
		t.Fatal("RunDaemon did not return after its context ended")
	}
	for _, want := range []string{"metrics listening", "draining", "stopped"} {
		if !strings.Contains(logs.String(), want) {
			t.Errorf("log lacks %q:\n%s", want, logs.String())
		}
	}
}

func TestRunDaemonBadListenAddress(t *testing.T) {
	srv, err := NewServer(Config{Logger: slog.New(slog.DiscardHandler)})
	if err != nil {
		t.Fatal(err)
	}
	err = RunDaemon(context.Background(), context.Background(), srv, DaemonOptions{Listen: "256.0.0.1:1"})
	if err == nil || !strings.Contains(err.Error(), "listen 256.0.0.1:1") {
		t.Fatalf("got %v, want a listen error naming the address", err)
	}
}

func TestServerTLSConfigRules(t *testing.T) {
	for _, c := range []struct {
		cert, key, ca, want string
	}{
		{"", "", "ca.pem", "client CA needs"},
		{"c.pem", "", "", "go together"},
		{"", "k.pem", "", "go together"},
		{"/nonexistent/c.pem", "/nonexistent/k.pem", "", "load TLS key pair"},
	} {
		if _, err := ServerTLSConfig(c.cert, c.key, c.ca); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("ServerTLSConfig(%q, %q, %q) = %v, want error with %q", c.cert, c.key, c.ca, err, c.want)
		}
	}
	if tc, err := ServerTLSConfig("", "", ""); tc != nil || err != nil {
		t.Errorf("plaintext: got %v, %v", tc, err)
	}
}
