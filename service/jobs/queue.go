package jobs

import (
	"context"
	"errors"
	"fmt"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/nats-io/nats.go/jetstream"
)

// Names of the JetStream objects (shared by every job).
const (
	// UnitStream is the work-queue stream of units, subjects
	// "fadeloop.unit.<job>".
	UnitStream = "FADELOOP_UNITS"
	// UnitSubjectPrefix prefixes a job ID to form its unit subject.
	UnitSubjectPrefix = "fadeloop.unit."
	// WorkerConsumer is the durable pull consumer all workers share.
	WorkerConsumer = "fadeloop-workers"
	// ResultBucket is the key-value bucket of results, key "<job>.<index>".
	ResultBucket = "fadeloop-results"
	// JobBucket is the key-value bucket of job records (JobInfo), key "<job>".
	JobBucket = "fadeloop-jobs"
)

// Defaults of Config.
const (
	DefaultAckWait     = 30 * time.Second
	DefaultMaxAttempts = 3
	DefaultReplicas    = 1
)

// Config sets up the queue. Zero fields take the defaults.
type Config struct {
	// AckWait is how long a delivered unit may go without an
	// acknowledgement or an extension before it is redelivered (a killed
	// worker's unit comes back after at most this long); workers extend it
	// every AckWait/3 while they compute. Default DefaultAckWait; at least
	// 1 s. It applies when this process creates the consumer; otherwise the
	// existing consumer's deadline is used.
	AckWait time.Duration
	// MaxAttempts is how many deliveries a unit gets; the last failure is
	// stored as a failed result. Default DefaultMaxAttempts; 1 to 100.
	MaxAttempts int
	// Replicas is the JetStream replica count of the stream and buckets
	// (3 on a 3-node cluster), used when this process creates them.
	// Default DefaultReplicas.
	Replicas int
}

func (c Config) withDefaults() (Config, error) {
	if c.AckWait == 0 {
		c.AckWait = DefaultAckWait
	}
	if c.MaxAttempts == 0 {
		c.MaxAttempts = DefaultMaxAttempts
	}
	if c.Replicas == 0 {
		c.Replicas = DefaultReplicas
	}
	switch {
	case c.AckWait < time.Second:
		return c, fmt.Errorf("jobs: AckWait must be at least 1s, got %v", c.AckWait)
	case c.MaxAttempts < 1 || c.MaxAttempts > 100:
		return c, fmt.Errorf("jobs: MaxAttempts must be in [1, 100], got %d", c.MaxAttempts)
	case c.Replicas < 1 || c.Replicas > 5:
		return c, fmt.Errorf("jobs: Replicas must be in [1, 5], got %d", c.Replicas)
	}
	return c, nil
}

// Queue is a connection to the JetStream objects of the package.
type Queue struct {
	nc      *nats.Conn
	js      jetstream.JetStream
	stream  jetstream.Stream
	cons    jetstream.Consumer
	results jetstream.KeyValue
	jobsKV  jetstream.KeyValue
	cfg     Config
}

// Connect connects to the NATS server at url (nats://host:port, a comma
// list for a cluster) and opens the stream, consumer and buckets, creating
// the missing ones with cfg (existing ones are used unchanged, and the
// consumer's ack deadline replaces cfg.AckWait). The connection reconnects for ever on loss (a restarted server
// is picked up again); Close ends it.
func Connect(ctx context.Context, url string, cfg Config) (*Queue, error) {
	cfg, err := cfg.withDefaults()
	if err != nil {
		return nil, err
	}
	nc, err := nats.Connect(url, nats.Name("fadeloop"), nats.MaxReconnects(-1),
		nats.ReconnectWait(250*time.Millisecond), nats.RetryOnFailedConnect(false))
	if err != nil {
		return nil, fmt.Errorf("jobs: connecting to %s: %w", url, err)
	}
	q, err := open(ctx, nc, cfg)
	if err != nil {
		nc.Close()
		return nil, err
	}
	return q, nil
}

func open(ctx context.Context, nc *nats.Conn, cfg Config) (*Queue, error) {
	js, err := jetstream.New(nc)
	if err != nil {
		return nil, err
	}
	q := &Queue{nc: nc, js: js, cfg: cfg}
	// Existing objects are used as they are: a client with default settings
	// must not change what the cluster's operator set up (replicas, ack
	// deadline); only missing objects are created with cfg.
	q.stream, err = js.Stream(ctx, UnitStream)
	if errors.Is(err, jetstream.ErrStreamNotFound) {
		q.stream, err = js.CreateStream(ctx, jetstream.StreamConfig{
			Name:        UnitStream,
			Description: "fadeloop work units (sweep points, tune replications)",
			Subjects:    []string{UnitSubjectPrefix + "*"},
			Retention:   jetstream.WorkQueuePolicy,
			Storage:     jetstream.FileStorage,
			Replicas:    cfg.Replicas,
			Duplicates:  2 * time.Minute,
		})
	}
	if err != nil {
		return nil, fmt.Errorf("jobs: stream %s: %w", UnitStream, err)
	}
	// Deliveries are unlimited at the server: the worker itself stores a
	// failed result on delivery MaxAttempts+1 (even when every earlier
	// delivery was lost with its worker), so no unit is left unanswered.
	q.cons, err = q.stream.Consumer(ctx, WorkerConsumer)
	if errors.Is(err, jetstream.ErrConsumerNotFound) {
		q.cons, err = q.stream.CreateConsumer(ctx, jetstream.ConsumerConfig{
			Durable:       WorkerConsumer,
			Description:   "fadeloop workers",
			AckPolicy:     jetstream.AckExplicitPolicy,
			AckWait:       cfg.AckWait,
			MaxDeliver:    -1,
			MaxAckPending: 10000,
			FilterSubject: UnitSubjectPrefix + "*",
			Replicas:      cfg.Replicas,
		})
	}
	if err != nil {
		return nil, fmt.Errorf("jobs: consumer %s: %w", WorkerConsumer, err)
	}
	if aw := q.cons.CachedInfo().Config.AckWait; aw > 0 {
		q.cfg.AckWait = aw // the deadline the server applies
	}
	for _, b := range []struct {
		kv   *jetstream.KeyValue
		name string
	}{{&q.results, ResultBucket}, {&q.jobsKV, JobBucket}} {
		*b.kv, err = js.KeyValue(ctx, b.name)
		if errors.Is(err, jetstream.ErrBucketNotFound) {
			*b.kv, err = js.CreateKeyValue(ctx, jetstream.KeyValueConfig{
				Bucket:       b.name,
				Storage:      jetstream.FileStorage,
				Replicas:     cfg.Replicas,
				MaxValueSize: 8 << 20,
			})
		}
		if err != nil {
			return nil, fmt.Errorf("jobs: bucket %s: %w", b.name, err)
		}
	}
	return q, nil
}

// Close drains nothing and closes the connection.
func (q *Queue) Close() { q.nc.Close() }

// Config returns the queue's configuration (defaults filled).
func (q *Queue) Config() Config { return q.cfg }

// retry calls f until it succeeds, ctx ends, or it fails with an error
// other than a lost connection or timeout (those happen while a server
// restarts or a cluster elects a leader).
func retry(ctx context.Context, f func(context.Context) error) error {
	wait := 100 * time.Millisecond
	for {
		cctx, cancel := context.WithTimeout(ctx, 10*time.Second)
		err := f(cctx)
		cancel()
		if err == nil || !transient(err) || ctx.Err() != nil {
			if err != nil && ctx.Err() != nil {
				return ctx.Err()
			}
			return err
		}
		select {
		case <-ctx.Done():
			return ctx.Err()
		case <-time.After(wait):
		}
		wait = min(2*wait, 2*time.Second)
	}
}

// transient reports whether err may go away on retry: timeouts, a lost or
// re-establishing connection, a JetStream that is not (yet) available.
func transient(err error) bool {
	if errors.Is(err, nats.ErrConnectionClosed) {
		return false
	}
	for _, e := range []error{context.DeadlineExceeded, nats.ErrTimeout, nats.ErrNoResponders,
		nats.ErrDisconnected, nats.ErrConnectionReconnecting, nats.ErrNoServers,
		jetstream.ErrNoHeartbeat, jetstream.ErrJetStreamNotEnabled, jetstream.ErrConsumerNotFound,
		jetstream.ErrStreamNotFound, jetstream.ErrBucketNotFound} {
		if errors.Is(err, e) {
			return true
		}
	}
	return false
}
