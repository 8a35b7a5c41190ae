package server

import (
	"runtime"
	"sort"

	grpcprom "github.com/grpc-ecosystem/go-grpc-middleware/providers/prometheus"
	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/collectors"

	"github.com/materials-lab/modegrid/physics/eigen"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
	"github.com/materials-lab/modegrid/server/cache"
	"github.com/materials-lab/modegrid/server/gate"
)

// latencyBuckets are the upper bounds (s) of the request and computation
// histograms: from a cached reply (~0.1 ms) to the longest computation the
// default caps allow (a 160³ grid with eigenvectors, tens of minutes on two
// cores). The library default stops at 10 s.
var latencyBuckets = []float64{
	0.0001, 0.00025, 0.0005, 0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5,
	1, 2.5, 5, 10, 30, 60, 120, 300, 600, 1200, 1800, 3600,
}

// Computation kinds: the values of the "kind" label of the computation
// metrics. A fixed, small set.
var computeKinds = []string{kindCompile, kindCheck, kindGrid, kindModes, kindDispersion, kindDOS, kindThermal, kindGruneisen, kindQHA, kindConductivity, kindFit, kindInfrared, kindScatter}

// Cache kinds: the values of the "kind" label of the cache metrics.
var cacheKinds = []string{kindModel, kindInline, kindCheck, kindGrid, kindDispersion, kindDOS, kindThermal, kindGruneisen, kindQHA, kindConductivity, kindInfrared, kindScatter}

const (
	kindCompile    = "compile"
	kindModel      = "model"
	kindInline     = "inline"
	kindCheck      = "check"
	kindGrid       = "grid"
	kindModes      = "modes"
	kindDispersion = "dispersion"
	kindDOS        = "dos"
	kindThermal    = "thermal"
	// Heat: mode Grüneisen parameters, quasi-harmonic thermodynamics,
	// lattice thermal conductivity (heat.go and its neighbours).
	kindGruneisen    = "gruneisen"
	kindQHA          = "quasi_harmonic"
	kindConductivity = "conductivity"
	kindFit          = "fit"
	kindInfrared     = "infrared"
	kindScatter      = "scatter"
)

// metrics are the server's Prometheus metrics, all registered on one
// registry passed in. Names are in base units; labels are low-cardinality
// (method, code, kind, reason) — never a model hash.
type metrics struct {
	grpc           *grpcprom.ServerMetrics
	computations   *prometheus.CounterVec // {kind} computations started
	canceled       *prometheus.CounterVec // {kind} stopped by cancellation or deadline
	rejected       *prometheus.CounterVec // {reason} refused by the gate
	qpoints        prometheus.Counter
	computeSeconds *prometheus.HistogramVec // {kind}
	panics         prometheus.Counter
	authFailures   prometheus.Counter
	cacheIntegrity *prometheus.CounterVec // {tier, reason} cache entries refused on read
	undecodable    *prometheus.CounterVec // {grpc_service, grpc_method} requests whose bytes did not decode
}

// skipCounter is what a Backend may offer about values it declined to
// store (server/cache/redis: larger than its per-entry cap).
type skipCounter interface{ SkippedTooLarge() uint64 }

// newMetrics creates the server's metrics and registers them on reg with
// the scrape-time gauges of the gate g and the cache c (and of backend,
// when it counts the values it skipped), the build info and the Go and
// process collectors. Every label value known in advance is created, so
// that its series reads 0 before the first event.
func newMetrics(reg prometheus.Registerer, g *gate.Gate, c *cache.Cache, backend cache.Backend, version string) *metrics {
	m := &metrics{
		grpc: grpcprom.NewServerMetrics(
			grpcprom.WithServerHandlingTimeHistogram(grpcprom.WithHistogramBuckets(latencyBuckets)),
		),
	}
	m.newComputationMetrics()
	m.newRequestMetrics()
	m.newCacheMetrics()
	m.newAdmissionMetrics()
	cs := []prometheus.Collector{
		m.grpc, m.computations, m.canceled, m.rejected, m.qpoints, m.computeSeconds, m.panics, m.authFailures, m.cacheIntegrity, m.undecodable, buildInfo(version),
	}
	cs = append(cs, admissionGauges(g)...)
	cs = append(cs,
		&cacheCollector{c: c},
		collectors.NewGoCollector(),
		collectors.NewProcessCollector(collectors.ProcessCollectorOpts{}),
	)
	reg.MustRegister(cs...)
	if sc, ok := backend.(skipCounter); ok {
		reg.MustRegister(prometheus.NewCounterFunc(prometheus.CounterOpts{
			Namespace: "modegrid", Name: "cache_backend_skipped_total",
			Help: "Values the second-level cache did not store because they exceeded its per-entry size cap.",
		}, func() float64 { return float64(sc.SkippedTooLarge()) }))
	}
	return m
}

// newComputationMetrics creates the computation metrics (started,
// cancelled, q-points, time), with every computation kind.
func (m *metrics) newComputationMetrics() {
	m.computations = prometheus.NewCounterVec(prometheus.CounterOpts{
		Namespace: "modegrid", Name: "computations_total",
		Help: "Computations started (after cache misses), by kind.",
	}, []string{"kind"})
	m.canceled = prometheus.NewCounterVec(prometheus.CounterOpts{
		Namespace: "modegrid", Name: "computations_canceled_total",
		Help: "Computations stopped early because every caller waiting for them cancelled or passed its deadline, by kind.",
	}, []string{"kind"})
	m.qpoints = prometheus.NewCounter(prometheus.CounterOpts{
		Namespace: "modegrid", Name: "qpoints_diagonalized_total",
		Help: "q-points at which a dynamical matrix was diagonalised.",
	})
	m.computeSeconds = prometheus.NewHistogramVec(prometheus.HistogramOpts{
		Namespace: "modegrid", Name: "compute_duration_seconds",
		Help:    "Time spent computing (holding a computation slot), by kind.",
		Buckets: latencyBuckets,
	}, []string{"kind"})
	for _, k := range computeKinds {
		m.computations.WithLabelValues(k)
		m.canceled.WithLabelValues(k)
		m.computeSeconds.WithLabelValues(k)
	}
}

// newRequestMetrics creates the request metrics beside the gRPC ones
// (panics, authentication failures, undecodable requests), the last with
// every method of the service.
func (m *metrics) newRequestMetrics() {
	m.panics = prometheus.NewCounter(prometheus.CounterOpts{
		Namespace: "modegrid", Name: "panics_recovered_total",
		Help: "Panics recovered and answered with INTERNAL.",
	})
	m.authFailures = prometheus.NewCounter(prometheus.CounterOpts{
		Namespace: "modegrid", Name: "auth_failures_total",
		Help: "Calls refused with UNAUTHENTICATED.",
	})
	m.undecodable = prometheus.NewCounterVec(prometheus.CounterOpts{
		Namespace: "modegrid", Name: "requests_undecodable_total",
		Help: "Request messages whose bytes did not decode as their protobuf type (answered INVALID_ARGUMENT), by service and method (labels as grpc_server_*).",
	}, []string{"grpc_service", "grpc_method"})
	sd := modegridv1.ModegridService_ServiceDesc
	for _, md := range sd.Methods {
		m.undecodable.WithLabelValues(sd.ServiceName, md.MethodName)
	}
	for _, st := range sd.Streams {
		m.undecodable.WithLabelValues(sd.ServiceName, st.StreamName)
	}
}

// newCacheMetrics creates the cache integrity counter with every tier and
// reason (the other cache figures are read at scrape time by
// cacheCollector).
func (m *metrics) newCacheMetrics() {
	m.cacheIntegrity = prometheus.NewCounterVec(prometheus.CounterOpts{
		Namespace: "modegrid", Name: "cache_integrity_failures_total",
		Help: "Cache entries refused on read and computed again, by tier (memory, shared) and reason (key_mismatch, checksum, decode, version).",
	}, []string{"tier", "reason"})
	for _, tier := range []string{cache.TierMemory, cache.TierShared} {
		for _, r := range []string{cache.ReasonKeyMismatch, cache.ReasonChecksum, cache.ReasonDecode, cache.ReasonVersion} {
			m.cacheIntegrity.WithLabelValues(tier, r)
		}
	}
}

// newAdmissionMetrics creates the counter of computations the gate
// refused, with every reason.
func (m *metrics) newAdmissionMetrics() {
	m.rejected = prometheus.NewCounterVec(prometheus.CounterOpts{
		Namespace: "modegrid", Name: "computations_rejected_total",
		Help: "Computations refused with RESOURCE_EXHAUSTED, by reason (queue_full, wait_timeout).",
	}, []string{"reason"})
	for _, r := range []string{gate.ReasonQueueFull, gate.ReasonWaitTimeout} {
		m.rejected.WithLabelValues(r)
	}
}

// admissionGauges read the gate g at scrape time: computations holding a
// slot, computations waiting, and the number of slots.
func admissionGauges(g *gate.Gate) []prometheus.Collector {
	return []prometheus.Collector{
		prometheus.NewGaugeFunc(prometheus.GaugeOpts{
			Namespace: "modegrid", Name: "computations_in_flight",
			Help: "Computations holding a slot now.",
		}, func() float64 { return float64(g.InFlight()) }),
		prometheus.NewGaugeFunc(prometheus.GaugeOpts{
			Namespace: "modegrid", Name: "computations_queued",
			Help: "Computations waiting for a slot now.",
		}, func() float64 { return float64(g.Queued()) }),
		prometheus.NewGaugeFunc(prometheus.GaugeOpts{
			Namespace: "modegrid", Name: "computation_slots",
			Help: "Computations admitted at once (max-concurrent).",
		}, func() float64 { return float64(g.Slots()) }),
	}
}

// buildInfo is the constant build_info gauge: 1, labelled with the
// build version, the Go version and the eigensolver linked ("go", or
// "lapack" for a build with the lapack tag: eigen.Backend).
func buildInfo(version string) prometheus.Collector {
	build := prometheus.NewGaugeVec(prometheus.GaugeOpts{
		Namespace: "modegrid", Name: "build_info",
		Help: "Always 1; labels carry the build version, Go version and eigensolver (go or lapack).",
	}, []string{"version", "goversion", "eigensolver"})
	build.WithLabelValues(version, runtime.Version(), eigen.Backend()).Set(1)
	return build
}

// cacheCollector exports cache.Stats at scrape time.
type cacheCollector struct{ c *cache.Cache }

var (
	cacheHitsDesc = prometheus.NewDesc("modegrid_cache_hits_total",
		"Cache lookups answered, by kind and level (memory or backend).", []string{"kind", "level"}, nil)
	cacheMissesDesc = prometheus.NewDesc("modegrid_cache_misses_total",
		"Cache lookups found in no level, by kind.", []string{"kind"}, nil)
	cacheJoinsDesc = prometheus.NewDesc("modegrid_cache_flight_joins_total",
		"Requests that waited for an identical computation already running, by kind.", []string{"kind"}, nil)
	cacheEvictionsDesc = prometheus.NewDesc("modegrid_cache_evictions_total",
		"Entries dropped from memory to respect the byte bound, by kind.", []string{"kind"}, nil)
	cacheRefusedDesc = prometheus.NewDesc("modegrid_cache_refused_total",
		"Values larger than the whole byte bound, not kept, by kind.", []string{"kind"}, nil)
	cacheBackendErrorsDesc = prometheus.NewDesc("modegrid_cache_backend_errors_total",
		"Second-level cache failures (the request was computed instead), by kind.", []string{"kind"}, nil)
	cacheBytesDesc = prometheus.NewDesc("modegrid_cache_bytes",
		"Bytes held in the in-process cache, by kind.", []string{"kind"}, nil)
	cacheEntriesDesc = prometheus.NewDesc("modegrid_cache_entries",
		"Entries held in the in-process cache, by kind.", []string{"kind"}, nil)
	cacheMaxBytesDesc = prometheus.NewDesc("modegrid_cache_max_bytes",
		"Byte bound of the in-process cache (0: disabled).", nil, nil)
)

func (cc *cacheCollector) Describe(ch chan<- *prometheus.Desc) {
	for _, d := range []*prometheus.Desc{cacheHitsDesc, cacheMissesDesc, cacheJoinsDesc, cacheEvictionsDesc,
		cacheRefusedDesc, cacheBackendErrorsDesc, cacheBytesDesc, cacheEntriesDesc, cacheMaxBytesDesc} {
		ch <- d
	}
}

func (cc *cacheCollector) Collect(ch chan<- prometheus.Metric) {
	stats := cc.c.Stats()
	kinds := append([]string(nil), cacheKinds...)
	for k := range stats {
		if !contains(kinds, k) {
			kinds = append(kinds, k)
		}
	}
	sort.Strings(kinds)
	counter := func(d *prometheus.Desc, v uint64, labels ...string) {
		ch <- prometheus.MustNewConstMetric(d, prometheus.CounterValue, float64(v), labels...)
	}
	gauge := func(d *prometheus.Desc, v int64, labels ...string) {
		ch <- prometheus.MustNewConstMetric(d, prometheus.GaugeValue, float64(v), labels...)
	}
	for _, k := range kinds {
		st := stats[k]
		counter(cacheHitsDesc, st.Hits, k, "memory")
		counter(cacheHitsDesc, st.BackendHits, k, "backend")
		counter(cacheMissesDesc, st.Misses, k)
		counter(cacheJoinsDesc, st.Joined, k)
		counter(cacheEvictionsDesc, st.Evictions, k)
		counter(cacheRefusedDesc, st.Refused, k)
		counter(cacheBackendErrorsDesc, st.BackendErrors, k)
		gauge(cacheBytesDesc, st.Bytes, k)
		gauge(cacheEntriesDesc, st.Entries, k)
	}
	gauge(cacheMaxBytesDesc, max(cc.c.MaxBytes(), 0))
}

func contains(list []string, s string) bool {
	for _, x := range list {
		if x == s {
			return true
		}
	}
	return false
}
