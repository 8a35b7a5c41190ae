// Package redis is the Redis second level of modegrid's result cache: a
// cache.Backend shared by modegridd replicas. It lives apart from package
// cache so that only the server binary (server/cmd/modegridd) links the
// Redis client; the CLI, which embeds the server, does not.
package redis

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"sync/atomic"
	"time"

	goredis "github.com/redis/go-redis/v9"
	"github.com/redis/go-redis/v9/maintnotifications"
)

// Defaults applied by New to zero fields of Options.
const (
	// DefaultTTL is how long an entry lives in Redis. Results never go
	// stale (a model hash and its parameters fix the answer), so the TTL only
	// bounds the memory a shared Redis spends on models nobody asks for.
	DefaultTTL = 24 * time.Hour
	// DefaultMaxEntryBytes is the largest value stored; larger results
	// (a fine DOS with per-site projections, a long dispersion of a big
	// cell) stay in the in-memory LRU only.
	DefaultMaxEntryBytes = 4 << 20
	// DefaultTimeout bounds every Redis operation, dial included. A
	// loopback or in-cluster round trip takes well under a millisecond, so
	// 100 ms is ample for a healthy Redis and short against a computation.
	DefaultTimeout = 100 * time.Millisecond
	// KeyPrefix is put in front of every key so that modegrid can share
	// a Redis with other programs.
	KeyPrefix = "modegrid:"
)

// Options configure a Redis backend. The zero value is usable: every
// zero field takes its default.
type Options struct {
	// Addr is the Redis server, host:port (empty: 127.0.0.1:6379).
	Addr string
	// TTL is the lifetime of each stored entry (0: DefaultTTL).
	TTL time.Duration
	// MaxEntryBytes is the size cap per entry, bytes; Set skips larger
	// values (0: DefaultMaxEntryBytes).
	MaxEntryBytes int
	// Timeout bounds each Get or Set, including dialling (0:
	// DefaultTimeout).
	Timeout time.Duration
	// Password is sent with AUTH on every new connection (Redis's
	// requirepass); empty: none. It is never logged.
	Password string
}

// String describes the options without the password, so that logging
// them never leaks it.
func (o Options) String() string {
	return fmt.Sprintf("addr=%s ttl=%v max_entry_bytes=%d timeout=%v password_set=%v",
		o.Addr, o.TTL, o.MaxEntryBytes, o.Timeout, o.Password != "")
}

// IsAuthError reports whether err is Redis refusing the credentials: a
// wrong password (WRONGPASS) or none where one is required (NOAUTH). These
// are configuration errors, not outages: retrying will not fix them. (A
// Redis without requirepass accepts any password.)
func IsAuthError(err error) bool { return err != nil && goredis.IsAuthError(err) }

// Backend is a cache.Backend that keeps entries in a Redis server shared by
// several modegridd replicas. It never blocks a request for long: every operation
// is bounded by the configured timeout, commands are not retried, and after
// repeated dial failures go-redis's pool fails fast (probing the server in
// the background once a second) until Redis is back. Errors are returned to
// the caller, which counts them and computes instead. Safe for concurrent
// use.
type Backend struct {
	rdb     *goredis.Client
	ttl     time.Duration
	maxSize int
	timeout time.Duration
	skipped atomic.Uint64 // values not stored because they exceeded maxSize
}

// New returns a Redis backend for opt. It does not connect: the first
// operation dials, so a replica starts even while Redis is down.
func New(opt Options) *Backend {
	if opt.Addr == "" {
		opt.Addr = "127.0.0.1:6379"
	}
	if opt.TTL <= 0 {
		opt.TTL = DefaultTTL
	}
	if opt.MaxEntryBytes <= 0 {
		opt.MaxEntryBytes = DefaultMaxEntryBytes
	}
	if opt.Timeout <= 0 {
		opt.Timeout = DefaultTimeout
	}
	rdb := goredis.NewClient(&goredis.Options{
		Addr:                  opt.Addr,
		Password:              opt.Password,
		DialTimeout:           opt.Timeout,
		ReadTimeout:           opt.Timeout,
		WriteTimeout:          opt.Timeout,
		PoolTimeout:           opt.Timeout,
		ContextTimeoutEnabled: true,
		// One dial attempt and no command retries: a cache that is not
		// answering is skipped, not waited for.
		DialerRetries: 1,
		MaxRetries:    -1,
		// No identity handshake (CLIENT SETINFO) and no maintenance
		// notifications: fewer round trips on each new connection, and
		// nothing a plain Redis 7.0 server refuses.
		DisableIdentity:          true,
		MaintNotificationsConfig: &maintnotifications.Config{Mode: maintnotifications.ModeDisabled},
	})
	return &Backend{rdb: rdb, ttl: opt.TTL, maxSize: opt.MaxEntryBytes, timeout: opt.Timeout}
}

// Get returns the value stored under key. A missing key is (nil, false,
// nil); an unreachable, slow or failing Redis is an error.
func (r *Backend) Get(ctx context.Context, key string) ([]byte, bool, error) {
	ctx, cancel := context.WithTimeout(ctx, r.timeout)
	defer cancel()
	b, err := r.rdb.Get(ctx, KeyPrefix+key).Bytes()
	if errors.Is(err, goredis.Nil) {
		return nil, false, nil
	}
	if err != nil {
		return nil, false, fmt.Errorf("redis get: %w", err)
	}
	return b, true, nil
}

// Set stores value under key with the configured TTL. A value larger than
// the size cap is skipped (not an error: the in-memory cache still holds
// it); SkippedTooLarge counts those.
func (r *Backend) Set(ctx context.Context, key string, value []byte) error {
	if len(value) > r.maxSize {
		r.skipped.Add(1)
		return nil
	}
	ctx, cancel := context.WithTimeout(ctx, r.timeout)
	defer cancel()
	if err := r.rdb.Set(ctx, KeyPrefix+key, value, r.ttl).Err(); err != nil {
		return fmt.Errorf("redis set: %w", err)
	}
	return nil
}

// Ping checks that Redis answers within the timeout; modegridd uses it to
// log the cache's state at start-up.
func (r *Backend) Ping(ctx context.Context) error {
	ctx, cancel := context.WithTimeout(ctx, r.timeout)
	defer cancel()
	if err := r.rdb.Ping(ctx).Err(); err != nil {
		return fmt.Errorf("redis ping: %w", err)
	}
	return nil
}

// SkippedTooLarge is the number of values Set did not store because they
// exceeded MaxEntryBytes.
func (r *Backend) SkippedTooLarge() uint64 { return r.skipped.Load() }

// Close closes the connections to Redis.
func (r *Backend) Close() error { return r.rdb.Close() }

// SetLogger sends go-redis's own log lines (one per failed dial while
// Redis is down, for example) to l at debug level instead of the standard
// library logger on stderr. The server already logs and counts every
// backend error, so these lines are detail. go-redis's logger is
// process-wide: call this once, from main.
func SetLogger(l *slog.Logger) {
	goredis.SetLogger(logger{l})
}

type logger struct{ l *slog.Logger }

func (r logger) Printf(ctx context.Context, format string, v ...any) {
	r.l.DebugContext(ctx, fmt.Sprintf(format, v...), "component", "go-redis")
}
