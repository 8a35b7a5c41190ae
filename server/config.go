package server

import (
	"errors"
	"fmt"
	"log/slog"
	"net"
	"runtime"
	"strings"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"google.golang.org/grpc"

	"github.com/materials-lab/modegrid/server/cache"
)

// Defaults of Config. Every zero field of a Config takes the default below
// when the server is built (see Config.withDefaults).
const (
	DefaultListen         = "127.0.0.1:7420"
	DefaultMetricsListen  = "127.0.0.1:9420"
	DefaultCacheBytes     = 512 << 20 // 512 MiB
	DefaultMaxQueue       = 64
	DefaultQueueTimeout   = 30 * time.Second
	DefaultMaxQPoints     = 1 << 22 // 4 194 304: a 160³ grid
	DefaultMaxSites       = 512
	DefaultMaxTemps       = 10000
	DefaultMaxPathPoints  = 100000
	DefaultMaxPathCorners = 1000
	DefaultMaxDOSBins     = 1000000
	DefaultMaxMsgBytes    = 16 << 20 // 16 MiB, matching client.DefaultMaxMessageBytes
	DefaultChunkPoints    = 256
	DefaultMaxChunkBytes  = 1 << 20 // 1 MiB of mode data per streamed message
	DefaultShutdownGrace  = 30 * time.Second
	DefaultStabilityMesh  = 8 // coarse grid of CheckModel, points per reciprocal direction

	// DefaultMaxUploadBytes caps the payload of one UploadModel stream:
	// 256 MiB, far above the largest supercell set the default caps
	// accept (512 atoms, N×N blocks: 18.9 MB).
	DefaultMaxUploadBytes = 256 << 20
	// DefaultMaxUploads is the number of uploads received at once.
	DefaultMaxUploads = 4
	// DefaultUploadIdleTimeout is the longest an upload may go without a
	// message before the server abandons it.
	DefaultUploadIdleTimeout = 30 * time.Second
)

// Keepalive policy published for clients. A client may ping at most every
// KeepaliveMinTime (also without an active call); pings more frequent than
// that close the connection with ENHANCE_YOUR_CALM. Matching client
// settings: keepalive.ClientParameters{Time: ≥ KeepaliveMinTime (the
// client library uses 30 s), Timeout: 10 s, PermitWithoutStream: true}.
//
// Connections are closed gracefully after MaxConnectionAge (so load
// balancers can rebalance long-lived clients); calls still running then get
// MaxConnectionAgeGrace to finish, which is longer than any computation the
// default limits allow on a 2-core machine.
const (
	KeepaliveMinTime      = 20 * time.Second
	KeepaliveTime         = 2 * time.Minute  // server pings an idle connection after this
	KeepaliveTimeout      = 20 * time.Second // and closes it if the ping is not answered within this
	MaxConnectionIdle     = 30 * time.Minute
	MaxConnectionAge      = 30 * time.Minute
	MaxConnectionAgeGrace = 10 * time.Minute
)

// Config configures a Server. The zero value is a working configuration:
// every zero field means its default (Default* constants above), so
// New(Config{}) serves with the defaults. Flags live only in modegridd.
type Config struct {
	// Listen is the gRPC address used by ListenAndServe ("" → DefaultListen).
	Listen string
	// MetricsListen is the HTTP address of /metrics used by ListenAndServe
	// ("" → DefaultMetricsListen; "off" → no metrics listener).
	MetricsListen string
	// HealthListen, when set, is a second gRPC address serving only the
	// standard health service, in plaintext and without tokens, for
	// probes that cannot use the main port's TLS (the kubelet's gRPC
	// probes); "" → no such port. See Server.ServeHealth.
	HealthListen string

	// CacheBytes bounds the in-process result cache, bytes (0 → 512 MiB;
	// negative → no in-process cache).
	CacheBytes int64
	// Backend is an optional second-level cache shared between replicas.
	Backend cache.Backend

	// MaxConcurrent is the number of computations run at once (0 → cores).
	MaxConcurrent int
	// MaxQueue is how many computations may wait for a slot (0 → 64;
	// negative → none wait).
	MaxQueue int
	// QueueTimeout is the longest a computation waits for a slot
	// (0 → 30 s).
	QueueTimeout time.Duration

	// Request caps, checked before any work; each refusal names its cap.
	MaxQPoints     int // q-points of one request (grid, cells or list) (0 → 4 194 304)
	MaxSites       int // sites of a model (0 → 512)
	MaxTemps       int // temperatures of one thermal request (0 → 10 000)
	MaxPathPoints  int // samples of one dispersion (0 → 100 000)
	MaxPathCorners int // corners of one path (0 → 1 000)
	MaxDOSBins     int // frequency samples of one DOS (0 → 1 000 000)
	MaxMsgBytes    int // largest gRPC message received or sent, bytes (0 → 16 MiB)

	// ChunkPoints is the default number of q-points per streamed modes
	// message (0 → 256); MaxChunkBytes bounds a message's mode data
	// (0 → 1 MiB, or a quarter of MaxMsgBytes if less), whatever chunk
	// size a client asks for.
	ChunkPoints   int
	MaxChunkBytes int

	// MaxUploadBytes caps the payload of one UploadModel stream, bytes
	// (0 → 256 MiB). MaxUploads is how many uploads are received at once
	// (0 → 4; more are refused RESOURCE_EXHAUSTED at once), and
	// UploadIdleTimeout the longest an upload may go without a message
	// (0 → 30 s). Each upload also reserves its estimated memory from
	// MemoryBudget before reading its payload (upload.go).
	MaxUploadBytes    int64
	MaxUploads        int
	UploadIdleTimeout time.Duration

	// MemoryBudget is the memory all computations together may take,
	// bytes, by their estimates (0 → derived from the container's memory
	// limit, see DerivedMemoryBudget).
	MemoryBudget int64
	// MaxComputeSeconds bounds the estimated compute time of one request,
	// seconds (0 → DefaultMaxComputeSeconds).
	MaxComputeSeconds float64

	// StabilityMesh is the coarse grid (points per reciprocal direction)
	// CheckModel searches for imaginary modes (0 → 8).
	StabilityMesh int

	// ShutdownGrace is how long ListenAndServe lets in-flight calls finish
	// after a stop signal before forcing them (0 → 30 s).
	ShutdownGrace time.Duration
	// DrainDelay is how long Shutdown keeps accepting calls after health
	// went NOT_SERVING, so load balancers and probes see it first (0: none).
	DrainDelay time.Duration

	// TLSCertFile and TLSKeyFile enable TLS (both or neither).
	TLSCertFile, TLSKeyFile string
	// ClientCAFile, with TLS, requires client certificates signed by it.
	ClientCAFile string
	// TokenFile, when set, holds the accepted bearer tokens, one a line
	// (blank lines and lines starting with # ignored). Calls other than
	// health checks must then send "authorization: Bearer <token>".
	TokenFile string

	// DisableReflection turns off the gRPC server reflection service.
	DisableReflection bool

	// Version is the build version reported by modegrid_build_info
	// ("" → "dev").
	Version string

	// Logger receives one JSON line per call and the server's events
	// (nil → discard).
	Logger *slog.Logger
	// ServerOptions are appended after the server's own gRPC options
	// (embedders and tests: extra interceptors, codecs). A
	// grpc.ChainUnaryInterceptor given here runs inside the server's
	// interceptors (after metrics, logging, recovery and authentication);
	// a grpc.UnaryInterceptor runs outside them.
	ServerOptions []grpc.ServerOption

	// Registry receives the server's metrics (nil → a new registry of its
	// own, see Server.Registry). Never the global default registry.
	Registry *prometheus.Registry
}

// withDefaults returns c with every zero field set to its default.
func (c Config) withDefaults() Config {
	setStr := func(p *string, d string) {
		if *p == "" {
			*p = d
		}
	}
	setInt := func(p *int, d int) {
		if *p == 0 {
			*p = d
		}
	}
	setStr(&c.Listen, DefaultListen)
	setStr(&c.MetricsListen, DefaultMetricsListen)
	if c.CacheBytes == 0 {
		c.CacheBytes = DefaultCacheBytes
	}
	setInt(&c.MaxConcurrent, runtime.GOMAXPROCS(0))
	setInt(&c.MaxQueue, DefaultMaxQueue)
	if c.QueueTimeout == 0 {
		c.QueueTimeout = DefaultQueueTimeout
	}
	setInt(&c.MaxQPoints, DefaultMaxQPoints)
	setInt(&c.MaxSites, DefaultMaxSites)
	setInt(&c.MaxTemps, DefaultMaxTemps)
	setInt(&c.MaxPathPoints, DefaultMaxPathPoints)
	setInt(&c.MaxPathCorners, DefaultMaxPathCorners)
	setInt(&c.MaxDOSBins, DefaultMaxDOSBins)
	setInt(&c.MaxMsgBytes, DefaultMaxMsgBytes)
	setInt(&c.ChunkPoints, DefaultChunkPoints)
	setInt(&c.MaxChunkBytes, min(DefaultMaxChunkBytes, c.MaxMsgBytes/4))
	setInt(&c.StabilityMesh, DefaultStabilityMesh)
	if c.MaxUploadBytes == 0 {
		c.MaxUploadBytes = DefaultMaxUploadBytes
	}
	setInt(&c.MaxUploads, DefaultMaxUploads)
	if c.UploadIdleTimeout == 0 {
		c.UploadIdleTimeout = DefaultUploadIdleTimeout
	}
	if c.MaxComputeSeconds == 0 {
		c.MaxComputeSeconds = DefaultMaxComputeSeconds
	}
	if c.ShutdownGrace == 0 {
		c.ShutdownGrace = DefaultShutdownGrace
	}
	setStr(&c.Version, "dev")
	if c.Logger == nil {
		c.Logger = slog.New(slog.DiscardHandler)
	}
	return c
}

// Validate reports every problem of c at once (after defaults), naming the
// setting. It does not read files; New does.
func (c Config) Validate() error {
	c = c.withDefaults()
	var errs []error
	bad := func(name, format string, args ...any) {
		errs = append(errs, fmt.Errorf("%s: %s", name, fmt.Sprintf(format, args...)))
	}
	c.validateAddresses(bad)
	c.validateLimits(bad)
	c.validateDurations(bad)
	c.validateTLS(bad)
	return errors.Join(errs...)
}

// complaint records one problem of a setting (name) for Validate.
type complaint func(name, format string, args ...any)

// validateAddresses checks the listen addresses: host:port each (metrics
// may be "off", health empty), and distinct unless ephemeral (":0").
func (c Config) validateAddresses(bad complaint) {
	for _, a := range []struct{ name, addr string }{{"listen", c.Listen}, {"metrics-listen", c.MetricsListen}, {"health-listen", c.HealthListen}} {
		if (a.name == "metrics-listen" && a.addr == "off") || (a.name == "health-listen" && a.addr == "") {
			continue
		}
		if _, _, err := net.SplitHostPort(a.addr); err != nil {
			bad(a.name, "not host:port: %v", err)
		}
	}
	if c.MetricsListen == c.Listen && !strings.HasSuffix(c.Listen, ":0") {
		bad("metrics-listen", "must differ from listen (%s)", c.Listen)
	}
	if c.HealthListen != "" && !strings.HasSuffix(c.HealthListen, ":0") &&
		(c.HealthListen == c.Listen || c.HealthListen == c.MetricsListen) {
		bad("health-listen", "must differ from listen (%s) and metrics-listen (%s)", c.Listen, c.MetricsListen)
	}
}

// validateLimits checks the counts and sizes: none negative, chunks at
// most half a message, the stability mesh at most 64, the memory budget
// not negative.
func (c Config) validateLimits(bad complaint) {
	positive := []struct {
		name string
		v    int
	}{
		{"max-concurrent", c.MaxConcurrent}, {"max-qpoints", c.MaxQPoints}, {"max-sites", c.MaxSites},
		{"max-temps", c.MaxTemps}, {"max-path-points", c.MaxPathPoints}, {"max-path-corners", c.MaxPathCorners},
		{"max-dos-bins", c.MaxDOSBins}, {"max-msg-bytes", c.MaxMsgBytes}, {"chunk-points", c.ChunkPoints},
		{"max-chunk-bytes", c.MaxChunkBytes}, {"stability-mesh", c.StabilityMesh}, {"max-uploads", c.MaxUploads},
	}
	for _, p := range positive {
		if p.v < 0 {
			bad(p.name, "must be > 0, got %d", p.v)
		}
	}
	if c.MaxChunkBytes > c.MaxMsgBytes/2 {
		bad("max-chunk-bytes", "must be at most half of max-msg-bytes (%d), got %d", c.MaxMsgBytes, c.MaxChunkBytes)
	}
	if c.StabilityMesh > 64 {
		bad("stability-mesh", "must be ≤ 64, got %d", c.StabilityMesh)
	}
	if c.MaxUploadBytes < 0 {
		bad("max-upload-bytes", "must be > 0, got %d", c.MaxUploadBytes)
	}
	if c.MemoryBudget < 0 {
		bad("memory-budget", "must be ≥ 0 (0: derived from the memory limit), got %d", c.MemoryBudget)
	}
}

// validateDurations checks the time limits and delays.
func (c Config) validateDurations(bad complaint) {
	if !(c.MaxComputeSeconds > 0) {
		bad("max-compute-seconds", "must be > 0, got %v", c.MaxComputeSeconds)
	}
	if c.QueueTimeout < 0 {
		bad("queue-timeout", "must be > 0, got %v", c.QueueTimeout)
	}
	if c.UploadIdleTimeout < 0 {
		bad("upload-idle-timeout", "must be > 0, got %v", c.UploadIdleTimeout)
	}
	if c.DrainDelay < 0 {
		bad("drain-delay", "must be ≥ 0, got %v", c.DrainDelay)
	}
	if c.ShutdownGrace < 0 {
		bad("shutdown-grace", "must be > 0, got %v", c.ShutdownGrace)
	}
}

// validateTLS checks that the certificate and key come together and that
// a client CA comes with them.
func (c Config) validateTLS(bad complaint) {
	if (c.TLSCertFile == "") != (c.TLSKeyFile == "") {
		bad("tls-cert/tls-key", "give both or neither (cert %q, key %q)", c.TLSCertFile, c.TLSKeyFile)
	}
	if c.ClientCAFile != "" && c.TLSCertFile == "" {
		bad("client-ca", "mutual TLS needs tls-cert and tls-key")
	}
}

// queueLen is the configured queue length, resolving negative to none.
func (c Config) queueLen() int {
	if c.MaxQueue < 0 {
		return 0
	}
	return c.MaxQueue
}

// cacheBytes is the memory bound, resolving negative to disabled.
func (c Config) cacheBytes() int64 {
	if c.CacheBytes < 0 {
		return 0
	}
	return c.CacheBytes
}
