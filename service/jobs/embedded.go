package jobs

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"time"

	"github.com/nats-io/nats-server/v2/server"
)

// Embedded is a NATS server with JetStream running inside the process, for
// the no-setup single-machine mode. It listens on a free loopback port.
type Embedded struct {
	srv    *server.Server
	unlock func()
}

// DefaultStoreDir is the on-disk store of the embedded server:
// <user cache dir>/fadeloop/queue (os.UserCacheDir, e.g. ~/.cache on Linux).
func DefaultStoreDir() (string, error) {
	d, err := os.UserCacheDir()
	if err != nil {
		return "", fmt.Errorf("jobs: no user cache directory for the queue store (give one explicitly): %w", err)
	}
	return filepath.Join(d, "fadeloop", "queue"), nil
}

// ErrStoreInUse is returned by StartEmbedded when another process runs a
// server on the store.
var ErrStoreInUse = errors.New("jobs: store in use")

// JobStoreDir is the embedded store of job id under root (one store per
// job, so that different jobs run at the same time in separate processes;
// only the same job is refused while another process runs it).
func JobStoreDir(root, id string) string { return filepath.Join(root, id) }

// StartEmbedded starts an embedded server storing its streams under dir
// (created if missing). Only one process may use a store at a time: a
// second one gets an error saying the store is in use.
func StartEmbedded(dir string) (*Embedded, error) {
	return startServer(dir, server.RANDOM_PORT)
}

// startServer starts an embedded server on 127.0.0.1:port.
func startServer(dir string, port int) (*Embedded, error) {
	if dir == "" {
		return nil, errors.New("jobs: StartEmbedded needs a store directory")
	}
	if err := os.MkdirAll(dir, 0o700); err != nil {
		return nil, fmt.Errorf("jobs: queue store: %w", err)
	}
	unlock, err := lockStore(dir)
	if err != nil {
		return nil, err
	}
	srv, err := server.NewServer(&server.Options{
		ServerName: "fadeloop-embedded",
		Host:       "127.0.0.1",
		Port:       port,
		JetStream:  true,
		StoreDir:   dir,
		NoSigs:     true,
		NoLog:      true,
	})
	if err != nil {
		unlock()
		return nil, fmt.Errorf("jobs: embedded queue server: %w", err)
	}
	srv.Start()
	if !srv.ReadyForConnections(30 * time.Second) {
		srv.Shutdown()
		unlock()
		return nil, errors.New("jobs: embedded queue server did not start within 30s")
	}
	return &Embedded{srv: srv, unlock: unlock}, nil
}

// URL is the server's client URL (nats://127.0.0.1:PORT).
func (e *Embedded) URL() string { return e.srv.ClientURL() }

// Shutdown stops the server; its store stays on disk.
func (e *Embedded) Shutdown() {
	e.srv.Shutdown()
	e.srv.WaitForShutdown()
	e.unlock()
}
