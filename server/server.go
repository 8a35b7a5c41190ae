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
	"google.golang.org/grpc/health"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	"google.golang.org/grpc/keepalive"
	"google.golang.org/grpc/reflection"

	"github.com/materials-lab/modegrid/physics"
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

	mu       sync.Mutex     // protects below
	http     []*http.Server // metrics servers started by ServeMetrics
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
	opts := []grpc.ServerOption{
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

// Shutdown stops the server gracefully: health goes NOT_SERVING, calls are
// still accepted for cfg.DrainDelay, then new calls are refused and calls
// in flight may finish until ctx ends; then every
// remaining call is cut off (its computation cancelled) and Shutdown
// returns ctx.Err(). The metrics endpoint stays up until the calls are done.
func (s *Server) Shutdown(ctx context.Context) error {
	s.mu.Lock()
	s.shutdown = true
	hs := s.http
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
		s.gs.GracefulStop()
		close(done)
	}()
	var err error
	select {
	case <-done:
	case <-ctx.Done():
		err = ctx.Err()
		s.cfg.Logger.Warn("grace period over: stopping calls still in flight", "in_flight", s.svc.gate.InFlight())
		s.gs.Stop()
		<-done
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

// Run listens on cfg.Listen (and cfg.MetricsListen unless "off"), serves
// until ctx ends, then shuts down within cfg.ShutdownGrace. It returns nil
// after a clean shutdown. ready, if not nil, is called with the bound
// addresses once both listeners are open.
func (s *Server) Run(ctx context.Context, ready func(grpcAddr, metricsAddr net.Addr)) error {
	lis, err := net.Listen("tcp", s.cfg.Listen)
	if err != nil {
		return fmt.Errorf("listen: %w", err)
	}
	var mlis net.Listener
	if s.cfg.MetricsListen != "off" {
		if mlis, err = net.Listen("tcp", s.cfg.MetricsListen); err != nil {
			lis.Close()
			return fmt.Errorf("metrics-listen: %w", err)
		}
	}
	errc := make(chan error, 2)
	go func() { errc <- s.Serve(lis) }()
	running := 1
	var maddr net.Addr
	if mlis != nil {
		maddr = mlis.Addr()
		running++
		go func() { errc <- s.ServeMetrics(mlis) }()
	}
	if ready != nil {
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
	shutErr := s.Shutdown(sctx)
	for ; running > 0; running-- {
		if err := <-errc; err != nil && serveErr == nil {
			serveErr = err
		}
	}
	if serveErr != nil {
		return serveErr
	}
	if shutErr != nil {
		return fmt.Errorf("shutdown: %w", shutErr)
	}
	return nil
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
	s := &Service{cfg: cfg, log: cfg.Logger}
	s.gate = gate.New(cfg.MaxConcurrent, cfg.queueLen(), cfg.QueueTimeout)
	s.cache = cache.New(cache.Options{
		MaxBytes: cfg.cacheBytes(),
		Backend:  cfg.Backend,
		OnBackendError: func(op string, k cache.Key, err error) {
			s.log.Warn("cache backend error", "op", op, "kind", k.Kind, "model", prefix(k.Model), "err", err)
		},
	})
	s.met = newMetrics(reg, s.gate, s.cache, cfg.Backend, cfg.Version)
	s.reductions = physics.NewReductionCache(cfg.reductionBytes())
	s.budget = newBudget(cfg, reg)
	return s
}
