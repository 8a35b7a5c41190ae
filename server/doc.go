package server

// This file is the operating manual of the service.
//
// # Embedding
//
//	srv, err := server.New(server.Config{}) // every zero field is a default
//	lis, err := net.Listen("tcp", "127.0.0.1:0")
//	go srv.Serve(lis)                       // nil after Shutdown
//	defer srv.Shutdown(ctx)                 // graceful until ctx ends, then forced
//
// Server.Run(ctx, ready) does the listening on Config.Listen,
// Config.MetricsListen and Config.HealthListen itself and shuts down within
// Config.ShutdownGrace once ctx ends, returning nil whether or not calls
// had to be cut off at the end of the grace; modegridd is Run plus flags
// and signals.
//
// # Requests and models
//
// Every RPC takes a ModelSource: the model inline, or the model_hash of a
// response to an earlier call. The server compiles a model once and keeps
// it under two keys — its serialised bytes and its hash — so repeated
// inline requests cost a hash of the bytes, and references work on any
// replica sharing the Backend. A reference the server does not hold (never
// sent, or evicted) is NOT_FOUND; the client resends the model inline.
//
// A model too large for one message (Config.MaxMsgBytes) comes through
// UploadModel (upload.go), a client stream of a header (declared size,
// optional SHA-256, the model's options) and chunks of the model's
// protobuf binary. The upload is admitted on its header before any chunk
// is read — an upload slot (Config.MaxUploads), the declared size against
// Config.MaxUploadBytes, its estimated memory (4× the payload) against the
// memory budget, then reserved from it — read while counting (a stream
// longer or shorter than declared, or whose digest differs, is refused;
// one silent for Config.UploadIdleTimeout is abandoned), and compiled
// exactly as an inline model (the same pre-compile bound, validation,
// fold and cache entries). The answer is the model hash an inline request
// gets; the model is then referable by it like any other, and like any
// other may be evicted (NOT_FOUND: upload it again).
//
// Every response carries the model hash and the canonical parameters (see
// params.go) that produced it.
//
// # Caching
//
// Results of CheckModel, ComputeDispersion, ComputeDos, ComputeThermal and
// ComputeInfrared are cached by (model hash, canonical parameters), so requests equal in
// meaning hit however they are spelled. The modes on a grid — the costly
// intermediate of a density of states or a thermal calculation — are
// cached by (model hash, grid, what is kept: frequencies, site weights or
// eigenvectors), so a DOS and a thermal request on one model and grid
// diagonalise once. Modes streams are not cached, nor fits (fit.go: their
// data are the request); a fit's fitted model is stored like an inline
// model, under its hash.
//
// The in-process cache is one LRU bounded in bytes (Config.CacheBytes,
// default 512 MiB, negative disables it — references by hash then work
// only through a Backend); concurrent identical requests
// wait for one computation (golang.org/x/sync/singleflight). The
// computation is cancelled only when every request waiting for it has gone.
// With a Backend (Redis, --redis-addr), results and models are also stored
// there as serialised protobuf and looked up after the LRU misses; any
// Backend failure is counted (modegrid_cache_backend_errors_total), logged
// at most once a minute with a count, and the request computed as if the
// key were absent. Losing either level loses only time.
//
// The cache never serves what it cannot vouch for: a Backend value travels
// in an envelope with its full key, format versions and a SHA-256, checked
// against the key asked for, and a decoded response must name the model
// hash and parameters of its key (a model must compile to its hash); LRU
// entries keep their full key, checked on every hit. A value failing a
// check is a miss, recomputed, counted in
// modegrid_cache_integrity_failures_total{tier,reason} and logged at most
// once a minute.
//
// # Limits and overload
//
// Request caps (Config.Max*) are checked before any work: q-points per
// request, sites per model, temperatures, path samples and corners, DOS
// samples, message size. A request over a cap is INVALID_ARGUMENT with a
// google.rpc.BadRequest violation naming the field and the cap
// ("… exceed this server's cap max-qpoints=4194304").
//
// Caps bound sizes one at a time; admission by estimated cost
// (admission.go) bounds their product. Before any work each request's peak
// memory and work are estimated (physics/cost.go and the cost.go of
// physics/spectra and physics/thermo). One that could never
// fit — over the whole Config.MemoryBudget, over Config.MaxComputeSeconds,
// or one streamed point over the message cap — is INVALID_ARGUMENT naming
// the field to change, the estimate and the budget. One that fits reserves
// its estimate from the budget all computations share while it computes,
// waiting at most Config.QueueTimeout, else RESOURCE_EXHAUSTED.
//
// At most Config.MaxConcurrent computations run at once (default: cores);
// up to Config.MaxQueue more wait, each at most Config.QueueTimeout.
// Beyond that a call gets RESOURCE_EXHAUSTED with QuotaFailure and
// RetryInfo details naming the cap. A client deadline or cancellation stops
// the computation (modegrid_computations_canceled_total counts it).
//
// # Status codes
//
//	INVALID_ARGUMENT     bad model or request, every bad field in BadRequest; request over a cap;
//	                     request bytes that do not decode as the message (see codec.go: grpc-go
//	                     alone answers those INTERNAL, before any interceptor)
//	NOT_FOUND            model_hash not held by this server (resend the model inline, or upload it)
//	FAILED_PRECONDITION  thermal properties or scattering of a model with imaginary modes without
//	                     allow_unstable; scattering of a model so soft that its intensities leave the
//	                     range of floating-point numbers
//	RESOURCE_EXHAUSTED   computation queue full or wait timed out; memory budget busy past the wait; message over max-msg-bytes;
//	                     uploads over max-uploads; an uploaded model larger than the model cache (cache-bytes)
//	DEADLINE_EXCEEDED    the client's deadline passed (the computation was stopped); an upload silent for
//	                     upload-idle-timeout
//	CANCELED             the client cancelled (the computation was stopped)
//	UNAUTHENTICATED      bearer tokens configured and none or a wrong one sent
//	UNAVAILABLE          the server is shutting down
//	INTERNAL             a bug: a recovered panic or unexpected error, logged and counted; a result
//	                     holding a NaN or ±Inf (results.go), logged, neither sent nor cached
//
// # Connections
//
// Keepalive enforcement: clients may ping every KeepaliveMinTime (20 s) or
// less often, also without calls in flight; the client library pings every
// 30 s. Connections are recycled after MaxConnectionAge (30 min) with
// MaxConnectionAgeGrace (10 min) for calls in flight, and closed after
// MaxConnectionIdle (30 min) idle. Messages up to Config.MaxMsgBytes
// (16 MiB) both ways, as the client library's default.
//
// # Security
//
// TLS from Config.TLSCertFile/TLSKeyFile (TLS 1.2 minimum); with
// Config.ClientCAFile, mutual TLS requiring client certificates that CA
// signed: the handshake refuses a client without a certificate (the client
// sees UNAVAILABLE), and every call checks the certificate's chain, validity
// period and client-authentication usage, refusing an expired or foreign
// certificate with UNAUTHENTICATED naming the reason. With
// Config.TokenFile, every call but the health service needs
// "authorization: Bearer <token>"; tokens are compared as SHA-256 digests
// in constant time. A refused call runs no handler and computes nothing.
//
// Config.HealthListen (or Server.ServeHealth) adds a plaintext port that
// serves the standard health service and nothing else, reporting the same
// status as the main port: for probes that cannot do TLS (the kubelet's
// gRPC probes) while the main port requires it.
//
// # Metrics
//
// Server.MetricsHandler (or ServeMetrics, or Run on Config.MetricsListen)
// serves the registry Config.Registry (a private one by default):
// grpc_server_* from go-grpc-middleware's Prometheus provider with latency
// buckets up to an hour; modegrid_computations_{in_flight,queued,total,
// canceled_total,rejected_total}, modegrid_compute_duration_seconds,
// modegrid_qpoints_diagonalized_total, modegrid_cache_{hits,misses,
// evictions,refused,flight_joins,backend_errors,integrity_failures}_total, modegrid_cache_
// {bytes,entries,max_bytes}, modegrid_panics_recovered_total,
// modegrid_auth_failures_total, modegrid_requests_undecodable_total{grpc_service,grpc_method},
// modegrid_build_info, modegrid_memory_budget{,_in_use}_bytes,
// modegrid_admission_refused_total{reason}, modegrid_uploads_total{result}
// (ok, too_large, busy, invalid_stream, invalid_model, idle_timeout,
// canceled, failed), modegrid_upload_received_bytes_total,
// modegrid_uploads_in_flight, and the Go and process collectors. Labels
// are method, code, kind, level, tier, reason and result only.
//
// # Logs
//
// One JSON line per call (log/slog): method, code, duration_ms, model
// (hash prefix), cache (memory, backend, shared, computed), peer and, on
// failure, the status message. Health checks log at debug (probes come
// every few seconds). A panic in a call is recovered (INTERNAL, "panic
// recovered" line); a panic in a goroutine the server starts outside calls
// is logged as one "crash" line and then ends the process as Go does.
//
// # Shutdown
//
// Shutdown sets health NOT_SERVING, keeps accepting calls for
// Config.DrainDelay, then refuses new calls while those in flight finish;
// when its context ends the rest are cut off and their computations
// cancelled (a warning with their number; each call's line has its code),
// and Shutdown returns the context's error. The health-only port stops
// last, after the main port.
