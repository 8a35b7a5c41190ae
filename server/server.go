// Package server implements the modegrid gRPC service. Handlers convert
// protobuf messages to physics types at the edge, call package physics, and
// convert back; they are the only place that makes gRPC status errors.
//
// See doc.go for the operating manual (caching, limits, status codes,
// security, metrics, shutdown).
package server

import (
	"context"
	"errors"
	"fmt"
	"net"
	"net/http"
	"sync"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/promhttp"
	"google.golang.org/grpc"
	"google.golang.org/grpc/encoding"
	protoenc "google.golang.org/grpc/encoding/proto"
	"google.golang.org/grpc/health"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	"google.golang.org/grpc/keepalive"
	"google.golang.org/grpc/reflection"

	"github.com/materials-lab/modegrid/physics/mesh"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
	"github.com/materials-lab/modegrid/server/cache"
	"github.com/materials-lab/modegrid/server/gate"
)

// Server is a configured modegrid gRPC server: the service, the health
// service, reflection, interceptors (metrics, logging, panic recovery,
// bearer tokens) and the Prometheus registry behind /metrics.
//
// Embedding with the defaults:
//
//	srv, err := server.New(server.Config{})
//	lis, err := net.Listen("tcp", "127.0.0.1:0")
//	go srv.Serve(lis)
//	... dial lis.Addr().String() ...
//	srv.Shutdown(ctx)
type Server struct {
	cfg    Config
	svc    *Service
	gs     *grpc.Server
	health *health.Server
	reg    *prometheus.Registry
	tokens *tokenSet    // nil: no token required
	certs  *clientCerts // nil: no client certificate required

	undecodable *undecodable // requests the codec could not decode, until their interceptor reports them

	mu       sync.Mutex     // protects below
	http     []*http.Server // metrics servers started by ServeMetrics
	healthGS []*grpc.Server // health-only servers started by ServeHealth
	shutdown bool
}

// New builds a Server from cfg (zero fields take their defaults). It reads
// the TLS and token files; it does not listen.
func New(cfg Config) (*Server, error) {
	if err := cfg.Validate(); err != nil {
		return nil, fmt.Errorf("server config: %w", err)
	}
	cfg = cfg.withDefaults()
	s := &Server{cfg: cfg, reg: cfg.Registry, health: health.NewServer()}
	if s.reg == nil {
		s.reg = prometheus.NewRegistry()
	}
	if cfg.TokenFile != "" {
		ts, err := loadTokens(cfg.TokenFile)
		if err != nil {
			return nil, fmt.Errorf("server config: %w", err)
		}
		s.tokens = ts
	}
	s.svc = newService(cfg, s.reg)
	s.undecodable = newUndecodable()
	opts := []grpc.ServerOption{
		grpc.ForceServerCodecV2(countingCodec{base: encoding.GetCodecV2(protoenc.Name), failed: s.undecodable}),
		grpc.ChainUnaryInterceptor(s.svc.met.grpc.UnaryServerInterceptor(), s.unaryInterceptor),
		grpc.ChainStreamInterceptor(s.svc.met.grpc.StreamServerInterceptor(), s.streamInterceptor),
		grpc.MaxRecvMsgSize(cfg.MaxMsgBytes),
		grpc.MaxSendMsgSize(cfg.MaxMsgBytes),
		grpc.KeepaliveEnforcementPolicy(keepalive.EnforcementPolicy{MinTime: KeepaliveMinTime, PermitWithoutStream: true}),
		grpc.KeepaliveParams(keepalive.ServerParameters{
			MaxConnectionIdle:     MaxConnectionIdle,
			MaxConnectionAge:      MaxConnectionAge,
			MaxConnectionAgeGrace: MaxConnectionAgeGrace,
			Time:                  KeepaliveTime,
			Timeout:               KeepaliveTimeout,
		}),
	}
	if cfg.TLSCertFile != "" {
		creds, cc, err := tlsCredentials(cfg.TLSCertFile, cfg.TLSKeyFile, cfg.ClientCAFile)
		if err != nil {
			return nil, fmt.Errorf("server config: %w", err)
		}
		opts = append(opts, grpc.Creds(creds))
		s.certs = cc
	}
	s.gs = grpc.NewServer(append(opts, cfg.ServerOptions...)...)
	modegridv1.RegisterModegridServiceServer(s.gs, s.svc)
	healthpb.RegisterHealthServer(s.gs, s.health)
	if !cfg.DisableReflection {
		reflection.Register(s.gs)
	}
	s.svc.met.grpc.InitializeMetrics(s.gs)
	s.setServing(healthpb.HealthCheckResponse_NOT_SERVING)
	return s, nil
}

func (s *Server) setServing(st healthpb.HealthCheckResponse_ServingStatus) {
	s.health.SetServingStatus("", st)
	s.health.SetServingStatus(modegridv1.ModegridService_ServiceDesc.ServiceName, st)
}

// Registry is the Prometheus registry holding the server's metrics.
func (s *Server) Registry() *prometheus.Registry { return s.reg }

// Config is the configuration in use, defaults resolved.
func (s *Server) Config() Config { return s.cfg }

// Serve accepts gRPC connections on lis until Shutdown. The health service
// reports SERVING from now on. It returns nil after Shutdown.
func (s *Server) Serve(lis net.Listener) error {
	s.mu.Lock()
	if !s.shutdown {
		s.setServing(healthpb.HealthCheckResponse_SERVING)
	}
	s.mu.Unlock()
	err := s.gs.Serve(lis)
	if errors.Is(err, grpc.ErrServerStopped) {
		return nil
	}
	return err
}

// MetricsHandler serves the registry in the Prometheus text format.
func (s *Server) MetricsHandler() http.Handler {
	return promhttp.HandlerFor(s.reg, promhttp.HandlerOpts{Registry: s.reg})
}

// ServeMetrics serves /metrics over HTTP on lis until Shutdown, then
// returns nil.
func (s *Server) ServeMetrics(lis net.Listener) error {
	mux := http.NewServeMux()
	mux.Handle("/metrics", s.MetricsHandler())
	hs := &http.Server{Handler: mux, ReadHeaderTimeout: 10 * time.Second}
	s.mu.Lock()
	if s.shutdown {
		s.mu.Unlock()
		lis.Close()
		return nil
	}
	s.http = append(s.http, hs)
	s.mu.Unlock()
	if err := hs.Serve(lis); !errors.Is(err, http.ErrServerClosed) {
		return err
	}
	return nil
}

// ServeHealth serves only the standard gRPC health service, in plaintext,
// on lis until Shutdown, then returns nil. It is the port for probes that
// cannot speak TLS or send tokens (the kubelet's gRPC probes) while the
// main port requires them: it reports the same status as the main port's
// health service and serves nothing else (no computation, no reflection).
func (s *Server) ServeHealth(lis net.Listener) error {
	gs := grpc.NewServer(
		grpc.ForceServerCodecV2(countingCodec{base: encoding.GetCodecV2(protoenc.Name), failed: s.undecodable}),
		grpc.MaxRecvMsgSize(4<<10), // a HealthCheckRequest is a service name
		grpc.ChainUnaryInterceptor(s.healthLogInterceptor),
		grpc.ChainStreamInterceptor(s.healthStreamLogInterceptor),
	)
	healthpb.RegisterHealthServer(gs, s.health)
	s.mu.Lock()
	if s.shutdown {
		s.mu.Unlock()
		lis.Close()
		return nil
	}
	s.healthGS = append(s.healthGS, gs)
	s.mu.Unlock()
	if err := gs.Serve(lis); err != nil && !errors.Is(err, grpc.ErrServerStopped) {
		return err
	}
	return nil
}

// Shutdown stops the server gracefully: health goes NOT_SERVING, calls are
// still accepted for cfg.DrainDelay, then new calls are refused and calls
// in flight may finish until ctx ends; then every
// remaining call is cut off (its computation cancelled) and Shutdown
// returns ctx.Err(). The metrics endpoint stays up until the calls are done.
func (s *Server) Shutdown(ctx context.Context) error {
	s.mu.Lock()
	s.shutdown = true
	hs, hgs := s.http, s.healthGS
	s.mu.Unlock()
	s.health.Shutdown() // every service NOT_SERVING, further updates ignored
	s.cfg.Logger.Info("draining", "in_flight", s.svc.gate.InFlight(), "queued", s.svc.gate.Queued(), "drain_delay", s.cfg.DrainDelay.String())
	if s.cfg.DrainDelay > 0 {
		t := time.NewTimer(s.cfg.DrainDelay)
		select {
		case <-t.C:
		case <-ctx.Done():
			t.Stop()
		}
	}
	done := make(chan struct{})
	go func() {
		defer s.crashGuard("graceful-stop")
		s.gs.GracefulStop()
		close(done)
	}()
	var err error
	select {
	case <-done:
	case <-ctx.Done():
		err = ctx.Err()
		s.cfg.Logger.Warn("grace period over: stopping calls still in flight (each logged with its code)",
			"in_flight", s.svc.gate.InFlight(), "queued", s.svc.gate.Queued())
		s.gs.Stop()
		<-done
	}
	for _, g := range hgs {
		g.Stop() // probes are short unary calls: nothing to drain
	}
	hctx, cancel := context.WithTimeout(context.WithoutCancel(ctx), time.Second)
	defer cancel()
	for _, h := range hs {
		if e := h.Shutdown(hctx); e != nil {
			h.Close()
		}
	}
	return err
}

// Run listens on cfg.Listen (and cfg.MetricsListen unless "off", and
// cfg.HealthListen if set), serves until ctx ends, then shuts down within
// cfg.ShutdownGrace. It returns nil after any orderly shutdown, including
// one whose grace period ran out: the calls then cut off are logged (a
// warning with their number, and each call's own line with its code), and
// cutting them is the documented end of the grace, not a failure. It
// returns an error only when a listener could not be opened or serving
// failed. ready, if not nil, is called with the bound gRPC and metrics
// addresses once every listener is open.
func (s *Server) Run(ctx context.Context, ready func(grpcAddr, metricsAddr net.Addr)) error {
	lis, mlis, hlis, err := s.listen()
	if err != nil {
		return err
	}
	errc := make(chan error, 3)
	running := 0
	start := func(name string, serve func(net.Listener) error, l net.Listener) {
		if l == nil {
			return
		}
		running++
		go func() {
			defer s.crashGuard(name)
			errc <- serve(l)
		}()
	}
	start("serve", s.Serve, lis)
	start("serve-metrics", s.ServeMetrics, mlis)
	start("serve-health", s.ServeHealth, hlis)
	if ready != nil {
		var maddr net.Addr
		if mlis != nil {
			maddr = mlis.Addr()
		}
		ready(lis.Addr(), maddr)
	}
	var serveErr error
	select {
	case <-ctx.Done():
	case serveErr = <-errc:
		running--
	}
	sctx, cancel := context.WithTimeout(context.WithoutCancel(ctx), s.cfg.ShutdownGrace)
	defer cancel()
	if err := s.Shutdown(sctx); err != nil {
		s.cfg.Logger.Warn("stopped after the grace period: calls still running were cut off", "grace", s.cfg.ShutdownGrace.String())
	}
	for ; running > 0; running-- {
		if err := <-errc; err != nil && serveErr == nil {
			serveErr = err
		}
	}
	return serveErr
}

// listen opens the gRPC listener and, when configured, the metrics and
// health listeners (nil when off), closing what it opened on failure.
func (s *Server) listen() (lis, mlis, hlis net.Listener, err error) {
	if lis, err = net.Listen("tcp", s.cfg.Listen); err != nil {
		return nil, nil, nil, fmt.Errorf("listen: %w", err)
	}
	if s.cfg.MetricsListen != "off" {
		if mlis, err = net.Listen("tcp", s.cfg.MetricsListen); err != nil {
			lis.Close()
			return nil, nil, nil, fmt.Errorf("metrics-listen: %w", err)
		}
	}
	if s.cfg.HealthListen != "" {
		if hlis, err = net.Listen("tcp", s.cfg.HealthListen); err != nil {
			lis.Close()
			if mlis != nil {
				mlis.Close()
			}
			return nil, nil, nil, fmt.Errorf("health-listen: %w", err)
		}
	}
	return lis, mlis, hlis, nil
}

// NewService returns a Service with the default configuration and a
// private metrics registry, for use with Register on a grpc.Server the
// caller builds. Prefer New, which adds the interceptors, limits on message
// size, keepalive policy and metrics endpoint.
func NewService() *Service {
	return newService(Config{}.withDefaults(), prometheus.NewRegistry())
}

// Register adds the modegrid service and the standard health service to s,
// and returns the health server (reporting SERVING) so the caller can
// follow readiness.
func Register(s *grpc.Server, svc *Service) *health.Server {
	modegridv1.RegisterModegridServiceServer(s, svc)
	h := health.NewServer()
	healthpb.RegisterHealthServer(s, h)
	h.SetServingStatus("", healthpb.HealthCheckResponse_SERVING)
	h.SetServingStatus(modegridv1.ModegridService_ServiceDesc.ServiceName, healthpb.HealthCheckResponse_SERVING)
	return h
}

// newService builds the service's cache, gate and metrics.
func newService(cfg Config, reg prometheus.Registerer) *Service {
	s := &Service{cfg: cfg, log: cfg.Logger,
		backendLog: newLogLimiter(cacheLogEvery), integrityLog: newLogLimiter(cacheLogEvery)}
	s.gate = gate.New(cfg.MaxConcurrent, cfg.queueLen(), cfg.QueueTimeout)
	s.cache = cache.New(cache.Options{
		MaxBytes:           cfg.cacheBytes(),
		Backend:            cfg.Backend,
		OnBackendError:     s.onBackendError,
		OnIntegrityFailure: s.onIntegrityFailure,
	})
	s.met = newMetrics(reg, s.gate, s.cache, cfg.Backend, cfg.Version)
	s.reductions = mesh.NewReductionCache(cfg.reductionBytes())
	s.budget = newBudget(cfg, reg)
	s.uploads = newUploads(cfg, reg)
	return s
}
