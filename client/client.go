package client

import (
	"context"
	"crypto/tls"
	"crypto/x509"
	"encoding/json"
	"errors"
	"fmt"
	"net"
	"os"
	"slices"
	"strings"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/backoff"
	_ "google.golang.org/grpc/balancer/ringhash" // registers ring_hash_experimental for WithModelAffinity
	"google.golang.org/grpc/credentials"
	"google.golang.org/grpc/credentials/insecure"
	_ "google.golang.org/grpc/health" // registers client-side health checking used by the service config
	"google.golang.org/grpc/keepalive"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// Defaults of Dial. The keepalive time is inside the server's keepalive
// enforcement policy (server.KeepaliveMinTime); the message limit equals the
// server's default receive and send limits.
const (
	// DefaultMaxMessageBytes is the largest message sent or received, 16 MiB.
	DefaultMaxMessageBytes = 16 << 20
	// DefaultKeepaliveTime is the interval between keepalive pings.
	DefaultKeepaliveTime = 30 * time.Second
	// DefaultKeepaliveTimeout is how long a ping may go unanswered before
	// the connection is considered dead.
	DefaultKeepaliveTimeout = 10 * time.Second
	// DefaultMaxAttempts is the number of attempts of a call that fails with
	// UNAVAILABLE (the first one included); gRPC caps it at 5.
	DefaultMaxAttempts = 4
	// DefaultReadyWait is how long an attempt waits for a ready server
	// (when the caller's deadline does not end the wait first): longer than
	// a replica's restart, short enough that a server that stays down is
	// reported to a caller without a deadline.
	DefaultReadyWait = 20 * time.Second
	// DefaultConnectBaseDelay is the wait before reconnecting after the
	// first failed connection attempt; each further failure multiplies it
	// by DefaultConnectMultiplier, up to DefaultConnectMaxDelay, and every
	// wait is spread by ±DefaultConnectJitter of itself.
	DefaultConnectBaseDelay = 200 * time.Millisecond
	// DefaultConnectMultiplier is the growth of the reconnection wait per
	// failed attempt (gRPC's own default).
	DefaultConnectMultiplier = 1.6
	// DefaultConnectJitter is the relative random spread of each
	// reconnection wait (gRPC's own default), so that clients that lost the
	// same server do not come back in step.
	DefaultConnectJitter = 0.2
	// DefaultConnectMaxDelay caps the reconnection wait, well inside
	// DefaultReadyWait, so a waiting call notices a returned server within
	// a few seconds.
	DefaultConnectMaxDelay = 5 * time.Second
	// DefaultMinConnectTimeout is the least time a connection attempt
	// (TCP, TLS and HTTP/2 handshakes) is given (gRPC's own default).
	DefaultMinConnectTimeout = 20 * time.Second
	// AffinityHeader is the request metadata key that carries the model hash
	// for WithModelAffinity; ring_hash hashes its value to pick a replica.
	AffinityHeader = "x-modegrid-model"
	// ServiceName is the full name of the modegrid gRPC service.
	ServiceName = "modegrid.v1.ModegridService"
)

// Client calls a modegrid server. It is safe for concurrent use. The zero
// value is not usable: create one with Dial.
type Client struct {
	conn       *grpc.ClientConn
	api        modegridv1.ModegridServiceClient
	affinity   bool
	maxResends int // resends of a call broken after the server began to answer
	refs       modelRefs
	maxMsg     int // largest message sent or received
	uploadAt   int // a request larger than this uploads its inline model first
	pin        pinnedConn
}

// Option configures Dial.
type Option func(*options)

type options struct {
	tls         *tls.Config // nil: plaintext
	err         error       // first error met while applying options
	token       string
	affinity    bool
	maxMsg      int
	uploadAt    int // 0: maxMsg
	keepalive   keepalive.ClientParameters
	maxAttempts int
	readyWait   time.Duration
	failFast    bool
	connect     backoff.Config
	noHealth    bool
	dialOpts    []grpc.DialOption
}

func (o *options) fail(err error) {
	if o.err == nil {
		o.err = err
	}
}

func (o *options) tlsConfig() *tls.Config {
	if o.tls == nil {
		o.tls = &tls.Config{MinVersion: tls.VersionTLS12}
	}
	return o.tls
}

// WithTLS uses TLS with the given configuration (nil: the system's root
// certificates and the target's host name). The configuration is cloned.
func WithTLS(cfg *tls.Config) Option {
	return func(o *options) {
		if cfg == nil {
			o.tlsConfig()
			return
		}
		o.tls = cfg.Clone()
	}
}

// WithCAFile uses TLS and trusts the PEM certificates in file (instead of the
// system roots) to verify the server.
func WithCAFile(file string) Option {
	return func(o *options) {
		b, err := os.ReadFile(file)
		if err != nil {
			o.fail(fmt.Errorf("read CA file: %w", err))
			return
		}
		pool := x509.NewCertPool()
		if !pool.AppendCertsFromPEM(b) {
			o.fail(fmt.Errorf("CA file %s holds no PEM certificate", file))
			return
		}
		o.tlsConfig().RootCAs = pool
	}
}

// WithClientCertificate uses mutual TLS: the client presents the certificate
// and key in the PEM files certFile and keyFile. It implies TLS.
func WithClientCertificate(certFile, keyFile string) Option {
	return func(o *options) {
		cert, err := tls.LoadX509KeyPair(certFile, keyFile)
		if err != nil {
			o.fail(fmt.Errorf("load client certificate: %w", err))
			return
		}
		cfg := o.tlsConfig()
		cfg.Certificates = append(cfg.Certificates, cert)
	}
}

// WithServerName sets the name the server certificate is verified against
// (default: the host of the target). It implies TLS.
func WithServerName(name string) Option {
	return func(o *options) { o.tlsConfig().ServerName = name }
}

// WithToken sends "authorization: Bearer <token>" with every call. Without
// TLS it is allowed only for a loopback or unix-socket target, so a token
// never crosses a network in the clear.
func WithToken(token string) Option {
	return func(o *options) { o.token = token }
}

// WithModelAffinity routes every call for one model to the same replica, so
// its cached results are reused: the balancer becomes gRPC's ring_hash
// (ring_hash_experimental) with request-hash header AffinityHeader, and the
// Client sets that header to the model hash on each call. The first time a
// model is seen, the Client learns its hash with one CheckModel call.
// Replicas that come and go move only the models that hashed to them.
func WithModelAffinity() Option {
	return func(o *options) { o.affinity = true }
}

// WithMaxMessageBytes sets the largest message sent or received (default
// DefaultMaxMessageBytes); keep it at or below the server's limit.
func WithMaxMessageBytes(n int) Option {
	return func(o *options) {
		if n <= 0 {
			o.fail(fmt.Errorf("max message bytes must be > 0, got %d", n))
			return
		}
		o.maxMsg = n
	}
}

// WithUploadThreshold sets the request size, in bytes, above which a
// request's inline model is uploaded first (UploadModel) and the request
// sent by reference (default, and at most: the largest message,
// WithMaxMessageBytes). A server whose message cap is below the Client's
// refuses a larger request with RESOURCE_EXHAUSTED; the Client then
// uploads its model too, so the threshold matters only to spare that
// first refusal.
func WithUploadThreshold(n int) Option {
	return func(o *options) {
		if n <= 0 {
			o.fail(fmt.Errorf("upload threshold must be > 0, got %d", n))
			return
		}
		o.uploadAt = n
	}
}

// WithKeepalive replaces the keepalive parameters. Pinging more often than
// the server's enforcement policy allows makes the server close the
// connection (GOAWAY "too_many_pings").
func WithKeepalive(kp keepalive.ClientParameters) Option {
	return func(o *options) { o.keepalive = kp }
}

// WithMaxAttempts sets how many times a call failing with UNAVAILABLE is
// tried in all (default DefaultMaxAttempts; gRPC caps it at 5). 1 disables
// retries: gRPC's, and the Client's own resends of a call broken after the
// server began to answer (a modes stream is then not resumed either).
func WithMaxAttempts(n int) Option {
	return func(o *options) {
		if n < 1 {
			o.fail(fmt.Errorf("max attempts must be ≥ 1, got %d", n))
			return
		}
		o.maxAttempts = n
	}
}

// WithReadyWait sets how long one attempt of a call waits for a ready
// server before it fails with UNAVAILABLE (default DefaultReadyWait). The
// caller's deadline, if earlier, ends the wait too; the call then fails
// with DEADLINE_EXCEEDED. Either way IsUnreachable reports the error.
func WithReadyWait(d time.Duration) Option {
	return func(o *options) {
		if d <= 0 {
			o.fail(fmt.Errorf("ready wait must be > 0, got %v", d))
			return
		}
		o.readyWait = d
	}
}

// WithFailFast turns off waiting for a ready server: a call made while no
// server is ready fails at once with UNAVAILABLE (after the retries of
// WithMaxAttempts, whose back-off is short). For tools that want to see
// every refusal; a service should keep the default.
func WithFailFast() Option {
	return func(o *options) { o.failFast = true }
}

// WithConnectBackoff replaces the back-off between connection attempts to
// a server that cannot be reached (defaults DefaultConnectBaseDelay,
// DefaultConnectMultiplier, DefaultConnectJitter and
// DefaultConnectMaxDelay).
func WithConnectBackoff(b backoff.Config) Option {
	return func(o *options) {
		var bad []string
		if b.BaseDelay <= 0 {
			bad = append(bad, fmt.Sprintf("base delay must be > 0, got %v", b.BaseDelay))
		}
		if !(b.Multiplier >= 1) {
			bad = append(bad, fmt.Sprintf("multiplier must be ≥ 1, got %v", b.Multiplier))
		}
		if !(b.Jitter >= 0 && b.Jitter <= 1) {
			bad = append(bad, fmt.Sprintf("jitter must be in [0, 1], got %v", b.Jitter))
		}
		if b.MaxDelay < b.BaseDelay {
			bad = append(bad, fmt.Sprintf("max delay %v must be ≥ base delay %v", b.MaxDelay, b.BaseDelay))
		}
		if len(bad) > 0 {
			o.fail(fmt.Errorf("connect back-off: %s", strings.Join(bad, "; ")))
			return
		}
		o.connect = b
	}
}

// WithoutHealthCheck turns off client-side health checking (on by default:
// a replica whose health service reports NOT_SERVING gets no calls).
func WithoutHealthCheck() Option {
	return func(o *options) { o.noHealth = true }
}

// WithDialOptions appends raw gRPC dial options, applied after the defaults.
func WithDialOptions(d ...grpc.DialOption) Option {
	return func(o *options) { o.dialOpts = append(o.dialOpts, d...) }
}

// Dial creates a client for target, any gRPC target: "127.0.0.1:7420",
// "dns:///modegrid.lab.svc:7420" (balanced over every address), or
// "unix:///run/modegrid.sock". The connection is made lazily, on the first
// call; Dial fails only on bad options.
func Dial(target string, opt ...Option) (*Client, error) {
	o := options{
		maxMsg:      DefaultMaxMessageBytes,
		maxAttempts: DefaultMaxAttempts,
		readyWait:   DefaultReadyWait,
		connect: backoff.Config{
			BaseDelay:  DefaultConnectBaseDelay,
			Multiplier: DefaultConnectMultiplier,
			Jitter:     DefaultConnectJitter,
			MaxDelay:   DefaultConnectMaxDelay,
		},
		keepalive: keepalive.ClientParameters{
			Time:                DefaultKeepaliveTime,
			Timeout:             DefaultKeepaliveTimeout,
			PermitWithoutStream: true,
		},
	}
	for _, f := range opt {
		f(&o)
	}
	if o.err != nil {
		return nil, fmt.Errorf("modegrid client: %w", o.err)
	}
	sc, err := serviceConfig(o.affinity, o.maxAttempts, !o.noHealth, !o.failFast, false)
	if err != nil {
		return nil, fmt.Errorf("modegrid client: %w", err)
	}
	dopts := []grpc.DialOption{
		grpc.WithKeepaliveParams(o.keepalive),
		grpc.WithConnectParams(grpc.ConnectParams{Backoff: o.connect, MinConnectTimeout: DefaultMinConnectTimeout}),
		grpc.WithDefaultCallOptions(grpc.MaxCallRecvMsgSize(o.maxMsg), grpc.MaxCallSendMsgSize(o.maxMsg),
			grpc.WaitForReady(!o.failFast)),
		grpc.WithUserAgent("modegrid-go-client"),
	}
	if !o.failFast {
		w := waiter{d: o.readyWait}
		dopts = append(dopts, grpc.WithStatsHandler(w),
			grpc.WithChainUnaryInterceptor(w.unary), grpc.WithChainStreamInterceptor(w.stream))
	}
	if o.tls != nil {
		dopts = append(dopts, grpc.WithTransportCredentials(credentials.NewTLS(o.tls)))
	} else {
		dopts = append(dopts, grpc.WithTransportCredentials(insecure.NewCredentials()))
	}
	if o.token != "" {
		if o.tls == nil && !isLocalTarget(target) {
			return nil, fmt.Errorf("modegrid client: a bearer token needs TLS (WithTLS or WithCAFile) unless the target is loopback; target %q", target)
		}
		dopts = append(dopts, grpc.WithPerRPCCredentials(bearer{token: o.token, secure: o.tls != nil}))
	}
	dopts = append(dopts, o.dialOpts...)
	conn, err := grpc.NewClient(target, append(slices.Clip(dopts), grpc.WithDefaultServiceConfig(sc))...)
	if err != nil {
		return nil, fmt.Errorf("modegrid client: %w", err)
	}
	c := &Client{conn: conn, api: modegridv1.NewModegridServiceClient(conn), affinity: o.affinity, maxMsg: o.maxMsg, uploadAt: o.maxMsg}
	if o.uploadAt > 0 {
		c.uploadAt = min(o.uploadAt, o.maxMsg)
	}
	c.pin = pinnedConn{target: target, dopts: dopts, maxAttempts: o.maxAttempts, health: !o.noHealth, waitForReady: !o.failFast}
	if o.maxAttempts > 1 {
		c.maxResends = maxResends
	}
	return c, nil
}

// Close closes the connection (and the pinned one of uploaded models, if
// it was opened). Calls in progress fail with CANCELED.
func (c *Client) Close() error {
	err := c.conn.Close()
	c.pin.once.Do(func() { c.pin.err = errors.New("modegrid client: closed") }) // no pinned connection from now on
	if c.pin.conn != nil {
		err = errors.Join(err, c.pin.conn.Close())
	}
	return err
}

// Conn returns the underlying connection, for example to call the standard
// gRPC health service.
func (c *Client) Conn() *grpc.ClientConn { return c.conn }

// Raw returns the generated stub for calls the typed helpers do not cover.
// It bypasses the model reference cache, the affinity header and the
// Client's own resends; waiting for a ready server and gRPC's retry policy
// apply to its calls as to all others.
func (c *Client) Raw() modegridv1.ModegridServiceClient { return c.api }

// serviceConfig builds the gRPC service config JSON: the balancer, waiting
// for a ready server, the retry policy on UNAVAILABLE for every method of
// the service, and client-side health checking. Every method is retried:
// each is a pure computation on its request (no state changes on the
// server but its caches), so running one twice is harmless.
func serviceConfig(affinity bool, maxAttempts int, health, waitForReady, pinned bool) (string, error) {
	type obj = map[string]any
	lb := []obj{{"round_robin": obj{}}}
	switch {
	case affinity:
		lb = []obj{{"ring_hash_experimental": obj{"requestHashHeader": AffinityHeader}}}
	case pinned:
		lb = []obj{{"pick_first": obj{"shuffleAddressList": true}}}
	}
	mc := obj{
		"name":         []obj{{"service": ServiceName}},
		"waitForReady": waitForReady,
	}
	if maxAttempts > 1 {
		mc["retryPolicy"] = obj{
			"maxAttempts":          maxAttempts,
			"initialBackoff":       "0.1s",
			"maxBackoff":           "2s",
			"backoffMultiplier":    2.0,
			"retryableStatusCodes": []string{"UNAVAILABLE"},
		}
	}
	sc := obj{"loadBalancingConfig": lb, "methodConfig": []obj{mc}}
	if health {
		sc["healthCheckConfig"] = obj{"serviceName": ServiceName}
	}
	b, err := json.Marshal(sc)
	return string(b), err
}

// bearer adds a bearer token to every call.
type bearer struct {
	token  string
	secure bool
}

func (b bearer) GetRequestMetadata(_ context.Context, _ ...string) (map[string]string, error) {
	return map[string]string{"authorization": "Bearer " + b.token}, nil
}

func (b bearer) RequireTransportSecurity() bool { return b.secure }

// isLocalTarget reports whether target names a loopback address or a unix
// socket, where a plaintext token stays on the machine.
func isLocalTarget(target string) bool {
	if strings.HasPrefix(target, "unix:") || strings.HasPrefix(target, "unix-abstract:") {
		return true
	}
	if i := strings.Index(target, ":///"); i >= 0 {
		target = target[i+4:]
	}
	host, _, err := net.SplitHostPort(target)
	if err != nil {
		host = target
	}
	if host == "localhost" {
		return true
	}
	ip := net.ParseIP(strings.Trim(host, "[]"))
	return ip != nil && ip.IsLoopback()
}
