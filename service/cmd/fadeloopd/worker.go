package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"log/slog"
	"os/signal"
	"strings"
	"syscall"
	"time"

	"github.com/fadeloop/fadeloop/service"
	"github.com/fadeloop/fadeloop/service/jobs"
)

// workerUsage heads `fadeloopd worker -h`.
const workerUsage = `usage: fadeloopd worker --queue nats://HOST:PORT [flags]

Pulls sweep points and tune replications from the NATS JetStream work
queue, computes them and stores each result before acknowledging it. Run as
many as you like, on any machines that reach the NATS server; SIGINT or
SIGTERM hands the running units back to the queue and exits.
`

type workerOptions struct {
	queue, name                    string
	concurrency, maxAttempts, repl int
	ackWait                        time.Duration
	log                            *service.DaemonFlags // -log-level and -log-format only
}

func parseWorkerFlags(args []string, stderr io.Writer) (*workerOptions, error) {
	o := &workerOptions{log: service.NewDaemonFlags()}
	fs := flag.NewFlagSet("fadeloopd worker", flag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.Usage = func() {
		fmt.Fprint(stderr, workerUsage)
		fs.PrintDefaults()
	}
	fs.StringVar(&o.queue, "queue", "", "NATS server URL, nats://HOST:PORT (a comma list for a cluster); required")
	fs.IntVar(&o.concurrency, "concurrency", 1, "units computed at once (each engine run already uses every core)")
	fs.DurationVar(&o.ackWait, "ack-wait", jobs.DefaultAckWait, "redelivery deadline of a unit whose worker stops answering (extended while it computes); applies when this worker creates the queue, else the queue's own deadline is used")
	fs.IntVar(&o.maxAttempts, "max-attempts", jobs.DefaultMaxAttempts, "deliveries of a unit before it is stored as failed with its error")
	fs.IntVar(&o.repl, "replicas", jobs.DefaultReplicas, "JetStream replicas of the stream and buckets when this worker creates them (3 on a 3-node cluster)")
	fs.StringVar(&o.name, "name", "", "worker name stored with its results (default host:pid)")
	o.log.RegisterLogFlags(fs)
	if err := fs.Parse(args); err != nil {
		return nil, err
	}
	if fs.NArg() > 0 {
		return nil, fmt.Errorf("worker: unexpected arguments: %s", strings.Join(fs.Args(), " "))
	}
	if !strings.HasPrefix(o.queue, "nats://") && !strings.HasPrefix(o.queue, "tls://") {
		return nil, fmt.Errorf("worker: -queue must be a nats:// (or tls://) URL, got %q", o.queue)
	}
	if o.concurrency < 1 || o.concurrency > 256 {
		return nil, fmt.Errorf("worker: -concurrency must be in [1, 256], got %d", o.concurrency)
	}
	return o, nil
}

// runWorker is `fadeloopd worker`: it runs until SIGINT or SIGTERM.
func runWorker(args []string, stderr io.Writer) error {
	ctx, stop := signal.NotifyContext(context.Background(), syscall.SIGINT, syscall.SIGTERM)
	defer stop()
	return runWorkerCtx(ctx, args, stderr)
}

func runWorkerCtx(ctx context.Context, args []string, stderr io.Writer) error {
	o, err := parseWorkerFlags(args, stderr)
	if err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return nil
		}
		return err
	}
	logger, err := o.log.Logger(stderr)
	if err != nil {
		return err
	}
	cctx, cancel := context.WithTimeout(ctx, time.Minute)
	q, err := jobs.Connect(cctx, o.queue, jobs.Config{AckWait: o.ackWait, MaxAttempts: o.maxAttempts, Replicas: o.repl})
	cancel()
	if err != nil {
		return err
	}
	defer q.Close()
	logger.Info("worker started", slog.String("queue", o.queue), slog.Int("concurrency", o.concurrency))
	err = q.RunWorker(ctx, jobs.WorkerOptions{Concurrency: o.concurrency, Name: o.name, Logger: logger})
	logger.Info("worker stopped")
	return err
}
