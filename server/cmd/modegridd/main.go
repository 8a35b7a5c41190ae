// Command modegridd serves the modegrid gRPC API, with Prometheus metrics
// on a separate HTTP port.
//
// Every flag can also be set by an environment variable MODEGRID_<FLAG>,
// the flag name in capitals with "-" as "_" (--metrics-listen is
// MODEGRID_METRICS_LISTEN); a flag on the command line wins over the
// environment. Run `modegridd -h` for the list.
//
// A MODEGRID_* variable that names no flag is refused (exit 2), with the
// nearest known name suggested.
//
// SIGTERM or SIGINT stops it gracefully: health goes NOT_SERVING, new calls
// are refused after --drain-delay, calls in flight get --shutdown-grace to
// finish, then the rest are cut off (and logged). Every such stop exits 0,
// whether or not the grace ran out; exit 1 means the server could not
// start or serve. A panic outside a call is logged as one JSON line
// ("msg":"crash") before the process dies with Go's exit status 2.
package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"log/slog"
	"net"
	"os"
	"os/signal"
	"runtime/debug"
	"strconv"
	"strings"
	"syscall"

	"github.com/materials-lab/modegrid/physics/eigen"
	"github.com/materials-lab/modegrid/server"
	rediscache "github.com/materials-lab/modegrid/server/cache/redis"
)

// version is stamped at build time with -ldflags "-X main.version=…".
var version = "dev"

func main() {
	defer logPanic("main")
	ctx, stop := signal.NotifyContext(context.Background(), syscall.SIGTERM, syscall.SIGINT)
	code := run(ctx, os.Args[1:], os.Stdout, os.Stderr)
	stop()
	os.Exit(code)
}

// logPanic, deferred, writes a panic of the calling goroutine as one JSON
// log line on stderr, then lets it continue (Go's exit status 2 and trace).
func logPanic(goroutine string) {
	if p := recover(); p != nil {
		server.LogCrash(slog.New(slog.NewJSONHandler(os.Stderr, nil)), goroutine, p, debug.Stack())
		panic(p)
	}
}

// Exit codes.
const (
	exitOK     = 0
	exitFailed = 1 // could not start or serve
	exitUsage  = 2 // bad flag, environment variable or configuration
)

// options are the command line, before conversion to server.Config.
type options struct {
	cfg         server.Config
	cacheBytes  byteSize
	maxMsg      byteSize
	maxChunk    byteSize
	maxUpload   byteSize
	memBudget   byteSize
	maxQueue    int
	reflection  bool
	logLevel    string
	redis       rediscache.Options
	redisMax    byteSize
	redisPwFile string
	crashFile   string
	showVersion bool
}

// byteSize is a flag value in bytes accepting the suffixes KiB, MiB, GiB
// (and KB, MB, GB as powers of 1000).
type byteSize int64

func (b *byteSize) String() string { return strconv.FormatInt(int64(*b), 10) }

func (b *byteSize) Set(s string) error {
	s = strings.TrimSpace(s)
	mult := int64(1)
	for _, u := range []struct {
		suffix string
		mult   int64
	}{{"KiB", 1 << 10}, {"MiB", 1 << 20}, {"GiB", 1 << 30}, {"KB", 1e3}, {"MB", 1e6}, {"GB", 1e9}, {"B", 1}} {
		if strings.HasSuffix(s, u.suffix) {
			s, mult = strings.TrimSpace(strings.TrimSuffix(s, u.suffix)), u.mult
			break
		}
	}
	n, err := strconv.ParseInt(s, 10, 64)
	if err != nil || n < 0 {
		return fmt.Errorf("want a byte count ≥ 0 such as 536870912 or 512MiB")
	}
	*b = byteSize(n * mult)
	return nil
}

func newFlags(o *options) *flag.FlagSet {
	fs := flag.NewFlagSet("modegridd", flag.ContinueOnError)
	c := &o.cfg
	fs.StringVar(&c.Listen, "listen", server.DefaultListen, "gRPC listen address host:port")
	fs.StringVar(&c.MetricsListen, "metrics-listen", server.DefaultMetricsListen, `HTTP address of the Prometheus /metrics endpoint ("off" disables)`)
	fs.StringVar(&c.HealthListen, "health-listen", "", "address of a plaintext gRPC port serving only the health service, for probes when the main port uses TLS (empty: none)")
	o.cacheBytes = server.DefaultCacheBytes
	fs.Var(&o.cacheBytes, "cache-bytes", "in-process result cache bound, bytes (suffix KiB/MiB/GiB allowed; 0 disables)")
	fs.StringVar(&o.redis.Addr, "redis-addr", "", "Redis host:port of the shared second-level cache (empty: none)")
	fs.DurationVar(&o.redis.TTL, "redis-ttl", rediscache.DefaultTTL, "lifetime of a Redis cache entry")
	fs.DurationVar(&o.redis.Timeout, "redis-timeout", rediscache.DefaultTimeout, "bound on every Redis operation")
	o.redisMax = rediscache.DefaultMaxEntryBytes
	fs.Var(&o.redisMax, "redis-max-entry-bytes", "largest value stored in Redis, bytes")
	fs.StringVar(&o.redisPwFile, "redis-password-file", "", "file holding the Redis password (or set "+redisPasswordEnv+" to the password itself)")
	fs.IntVar(&c.MaxConcurrent, "max-concurrent", 0, "computations run at once (0: one per core)")
	fs.IntVar(&o.maxQueue, "max-queue", server.DefaultMaxQueue, "computations that may wait for a slot (0: none wait)")
	fs.DurationVar(&c.QueueTimeout, "queue-timeout", server.DefaultQueueTimeout, "longest wait for a computation slot before RESOURCE_EXHAUSTED")
	fs.IntVar(&c.MaxQPoints, "max-qpoints", server.DefaultMaxQPoints, "cap: q-points of one request")
	fs.IntVar(&c.MaxSites, "max-sites", server.DefaultMaxSites, "cap: sites of a model")
	fs.IntVar(&c.MaxTemps, "max-temps", server.DefaultMaxTemps, "cap: temperatures of one thermal request")
	fs.IntVar(&c.MaxPathPoints, "max-path-points", server.DefaultMaxPathPoints, "cap: samples of one dispersion")
	fs.IntVar(&c.MaxPathCorners, "max-path-corners", server.DefaultMaxPathCorners, "cap: corners of one dispersion path")
	fs.IntVar(&c.MaxDOSBins, "max-dos-bins", server.DefaultMaxDOSBins, "cap: frequency samples of one density of states")
	o.maxMsg = server.DefaultMaxMsgBytes
	fs.Var(&o.maxMsg, "max-msg-bytes", "cap: largest gRPC message received or sent, bytes")
	o.maxUpload = server.DefaultMaxUploadBytes
	fs.Var(&o.maxUpload, "max-upload-bytes", "cap: payload of one UploadModel stream (a model too large for one message), bytes")
	fs.IntVar(&c.MaxUploads, "max-uploads", server.DefaultMaxUploads, "uploads received at once; more are refused RESOURCE_EXHAUSTED")
	fs.DurationVar(&c.UploadIdleTimeout, "upload-idle-timeout", server.DefaultUploadIdleTimeout, "longest an upload may go without a message before it is abandoned")
	fs.IntVar(&c.ChunkPoints, "chunk-points", server.DefaultChunkPoints, "default q-points per streamed modes message")
	fs.Var(&o.memBudget, "memory-budget", "memory all computations together may take by their estimates, bytes (0: the container's memory limit, cgroup memory.max or GOMEMLIMIT, minus --cache-bytes, grid reductions (a quarter of --cache-bytes, at most 64 MiB) and a 256 MiB runtime reserve)")
	fs.Float64Var(&c.MaxComputeSeconds, "max-compute-seconds", server.DefaultMaxComputeSeconds, "bound on the estimated compute time of one request, seconds (work at a conservative 1 GFlop/s per core)")
	fs.Var(&o.maxChunk, "max-chunk-bytes", "bound on the mode data of one streamed message, bytes (0: 1 MiB or a quarter of --max-msg-bytes if less)")
	fs.IntVar(&c.StabilityMesh, "stability-mesh", server.DefaultStabilityMesh, "points per reciprocal direction of the coarse grid CheckModel searches for imaginary modes")
	fs.DurationVar(&c.ShutdownGrace, "shutdown-grace", server.DefaultShutdownGrace, "time calls in flight get to finish after SIGTERM/SIGINT")
	fs.DurationVar(&c.DrainDelay, "drain-delay", 0, "time calls are still accepted after health goes NOT_SERVING on a stop signal")
	fs.StringVar(&c.TLSCertFile, "tls-cert", "", "TLS certificate file (PEM); with --tls-key enables TLS")
	fs.StringVar(&c.TLSKeyFile, "tls-key", "", "TLS private key file (PEM)")
	fs.StringVar(&c.ClientCAFile, "client-ca", "", "CA file (PEM): require client certificates it signed (mutual TLS)")
	fs.StringVar(&c.TokenFile, "token-file", "", "file of accepted bearer tokens, one a line (health checks need none)")
	fs.BoolVar(&o.reflection, "reflection", true, "serve gRPC server reflection")
	fs.StringVar(&o.logLevel, "log-level", "info", "log level: debug, info, warn or error")
	fs.StringVar(&o.crashFile, "crash-file", "", "file receiving the runtime's output of a fatal crash, reported as one JSON line by the next start (empty: none)")
	fs.BoolVar(&o.showVersion, "version", false, "print the version and exit")
	fs.VisitAll(func(f *flag.Flag) {
		if f.Name != "version" {
			f.Usage += " [env " + envName(f.Name) + "]"
		}
	})
	fs.Usage = func() {
		fmt.Fprintf(fs.Output(), "usage: modegridd [flags]\n\nServes the modegrid gRPC API; Prometheus metrics on a separate HTTP port.\nEvery flag can also be set by the environment variable shown; a flag given wins.\n\n")
		fs.PrintDefaults()
	}
	return fs
}

// envName is the environment variable of a flag: MODEGRID_<NAME>.
func envName(flagName string) string {
	return "MODEGRID_" + strings.ToUpper(strings.ReplaceAll(flagName, "-", "_"))
}

// applyEnv sets every flag not given on the command line from its
// environment variable, reporting every bad value at once.
func applyEnv(fs *flag.FlagSet, getenv func(string) string) error {
	set := map[string]bool{}
	fs.Visit(func(f *flag.Flag) { set[f.Name] = true })
	var errs []error
	fs.VisitAll(func(f *flag.Flag) {
		if set[f.Name] {
			return
		}
		if v := getenv(envName(f.Name)); v != "" {
			if err := fs.Set(f.Name, v); err != nil {
				errs = append(errs, fmt.Errorf("%s=%q: %w", envName(f.Name), v, err))
			}
		}
	})
	return errors.Join(errs...)
}

// parse reads the command line and environment into options.
func parse(args []string, getenv func(string) string, stderr io.Writer) (*options, error) {
	o := &options{}
	fs := newFlags(o)
	fs.SetOutput(stderr)
	if err := fs.Parse(args); err != nil {
		return nil, err
	}
	if fs.NArg() > 0 {
		return nil, fmt.Errorf("unexpected argument %q", fs.Arg(0))
	}
	if err := applyEnv(fs, getenv); err != nil {
		return nil, err
	}
	if err := unknownEnv(fs, environ()); err != nil {
		return nil, err
	}
	c := &o.cfg
	// The flags' "0 disables" become the Config's negative values (a zero
	// Config field means "default").
	c.CacheBytes = int64(o.cacheBytes)
	if c.CacheBytes == 0 {
		c.CacheBytes = -1
	}
	c.MaxQueue = o.maxQueue
	if c.MaxQueue == 0 {
		c.MaxQueue = -1
	}
	c.MaxMsgBytes = int(o.maxMsg)
	c.MaxChunkBytes = int(o.maxChunk)
	c.MaxUploadBytes = int64(o.maxUpload)
	c.MemoryBudget = int64(o.memBudget)
	c.DisableReflection = !o.reflection
	o.redis.MaxEntryBytes = int(o.redisMax)
	pw, err := redisPassword(o.redisPwFile, getenv)
	if err != nil {
		return nil, err
	}
	o.redis.Password = pw
	c.Version = version
	var lvl slog.Level
	if err := lvl.UnmarshalText([]byte(o.logLevel)); err != nil {
		return nil, fmt.Errorf("log-level: want debug, info, warn or error, got %q", o.logLevel)
	}
	c.Logger = slog.New(slog.NewJSONHandler(stderr, &slog.HandlerOptions{Level: lvl}))
	if err := c.Validate(); err != nil {
		return nil, err
	}
	return o, nil
}

// run is main without the process: it serves until ctx ends and returns
// the exit code.
func run(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	args, faults := takeFaultFlag(args)
	o, err := parse(args, os.Getenv, stderr)
	if errors.Is(err, flag.ErrHelp) {
		return exitOK
	}
	if err != nil {
		fmt.Fprintf(stderr, "modegridd: %v\n", err)
		return exitUsage
	}
	if o.showVersion {
		fmt.Fprintln(stdout, "modegridd", version)
		return exitOK
	}
	log := o.cfg.Logger
	if faults {
		defer enableFaultInjection()()
		log.Warn("TEST ONLY: engine fault injection is on; calls with " + faultHeader + " metadata make the engine panic (" + unsafeFaultFlag + ")")
	}
	if o.crashFile != "" {
		f, err := openCrashFile(o.crashFile, log)
		if err != nil {
			fmt.Fprintf(stderr, "modegridd: %v\n", err)
			return exitUsage
		}
		defer f.Close()
	}
	if o.redis.Addr != "" {
		r, err := connectRedis(ctx, o.redis, log)
		if err != nil {
			fmt.Fprintf(stderr, "modegridd: %v\n", err)
			return exitFailed
		}
		defer r.Close()
		o.cfg.Backend = r
	}
	srv, err := server.New(o.cfg)
	if err != nil {
		fmt.Fprintf(stderr, "modegridd: %v\n", err)
		return exitUsage
	}
	cfg := srv.Config()
	err = srv.Run(ctx, func(grpcAddr, metricsAddr net.Addr) {
		attrs := []any{"version", version, "eigensolver", eigen.Backend(), "addr", grpcAddr.String(), "tls", cfg.TLSCertFile != "",
			"mtls", cfg.ClientCAFile != "", "tokens", cfg.TokenFile != "", "cache_bytes", max(cfg.CacheBytes, 0),
			"max_concurrent", cfg.MaxConcurrent, "redis", o.redis.Addr}
		if metricsAddr != nil {
			attrs = append(attrs, "metrics_addr", metricsAddr.String())
		}
		if cfg.HealthListen != "" {
			attrs = append(attrs, "health_listen", cfg.HealthListen)
		}
		if d := eigen.BackendDetail(); d != "" {
			attrs = append(attrs, "lapack", d)
		}
		log.Info("serving", attrs...)
	})
	if err != nil {
		log.Error("stopped with an error", "err", err)
		return exitFailed
	}
	log.Info("stopped")
	return exitOK
}
