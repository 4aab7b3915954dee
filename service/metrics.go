package service

import (
	"net/http"

	grpcprom "github.com/grpc-ecosystem/go-grpc-middleware/providers/prometheus"
	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/collectors"
	"github.com/prometheus/client_golang/prometheus/promhttp"
)

// metrics are the server's Prometheus collectors, on a registry of their
// own (so that several servers can live in one process, as in tests).
type metrics struct {
	registry      *prometheus.Registry
	grpc          *grpcprom.ServerMetrics
	inFlight      prometheus.Gauge
	queued        prometheus.Gauge
	rejected      *prometheus.CounterVec
	userSlots     prometheus.Counter
	gainSamples   prometheus.Counter
	lockstepSlots prometheus.Counter
	runRate       prometheus.Gauge
}

func newMetrics() *metrics {
	m := &metrics{
		registry: prometheus.NewRegistry(),
		grpc: grpcprom.NewServerMetrics(
			grpcprom.WithServerHandlingTimeHistogram(
				grpcprom.WithHistogramBuckets([]float64{
					0.0005, 0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5,
					1, 2.5, 5, 10, 30, 60, 300, 1800}),
			),
		),
		inFlight: prometheus.NewGauge(prometheus.GaugeOpts{
			Name: "fadeloop_runs_in_flight",
			Help: "Runs (Simulate, Sweep, StreamGains, CheckChannel) executing now.",
		}),
		queued: prometheus.NewGauge(prometheus.GaugeOpts{
			Name: "fadeloop_runs_queued",
			Help: "Calls waiting in the admission queue for a run slot.",
		}),
		rejected: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "fadeloop_rejected_total",
			Help: "Calls turned away before any work, by reason (invalid, cost, busy).",
		}, []string{"reason"}),
		userSlots: prometheus.NewCounter(prometheus.CounterOpts{
			Name: "fadeloop_simulated_user_slots_total",
			Help: "User-slots simulated by Simulate and Sweep; rate() gives user-slots/s.",
		}),
		gainSamples: prometheus.NewCounter(prometheus.CounterOpts{
			Name: "fadeloop_gain_samples_total",
			Help: "Complex tap-gain samples streamed by StreamGains.",
		}),
		lockstepSlots: prometheus.NewCounter(prometheus.CounterOpts{
			Name: "fadeloop_lockstep_slots_total",
			Help: "Slots answered by Lockstep streams.",
		}),
		runRate: prometheus.NewGauge(prometheus.GaugeOpts{
			Name: "fadeloop_last_run_user_slots_per_second",
			Help: "Throughput of the most recently finished run in user-slots/s.",
		}),
	}
	m.registry.MustRegister(
		m.grpc, m.inFlight, m.queued, m.rejected, m.userSlots, m.gainSamples,
		m.lockstepSlots, m.runRate,
		collectors.NewGoCollector(),
		collectors.NewProcessCollector(collectors.ProcessCollectorOpts{}),
	)
	for _, r := range []string{"invalid", "cost", "busy"} {
		m.rejected.WithLabelValues(r)
	}
	return m
}

func (m *metrics) handler() http.Handler {
	return promhttp.HandlerFor(m.registry, promhttp.HandlerOpts{Registry: m.registry})
}
