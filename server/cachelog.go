package server

import (
	"errors"
	"sync"
	"time"

	"github.com/materials-lab/modegrid/server/cache"
)

// cacheLogEvery is the shortest time between two log lines about one kind
// of cache trouble. An outage of the shared cache fails every lookup and
// every store (hundreds a second per replica); the counters count each one,
// the log says that it is happening and how often.
const cacheLogEvery = time.Minute

// logLimiter lets the first event through, then at most one per interval,
// and counts the events it held back in between. Safe for concurrent use.
type logLimiter struct {
	every time.Duration

	mu         sync.Mutex       // protects below
	now        func() time.Time // time.Now; tests step a clock of their own (setClock)
	next       time.Time        // no line before this
	suppressed uint64           // events held back since the last line
}

func newLogLimiter(every time.Duration) *logLimiter {
	return &logLimiter{every: every, now: time.Now}
}

// setClock replaces the limiter's clock (tests).
func (l *logLimiter) setClock(now func() time.Time) {
	l.mu.Lock()
	defer l.mu.Unlock()
	l.now = now
}

// allow reports whether this event gets a log line and, if so, how many
// events were held back since the previous line.
func (l *logLimiter) allow() (ok bool, suppressed uint64) {
	l.mu.Lock()
	defer l.mu.Unlock()
	now := l.now()
	if now.Before(l.next) {
		l.suppressed++
		return false, 0
	}
	l.next = now.Add(l.every)
	n := l.suppressed
	l.suppressed = 0
	return true, n
}

// onBackendError is the cache's OnBackendError: the failure is already
// counted (modegrid_cache_backend_errors_total); it is logged at most once
// per cacheLogEvery, with the number of failures since the last line.
func (s *Service) onBackendError(op string, k cache.Key, err error) {
	ok, n := s.backendLog.allow()
	if !ok {
		return
	}
	s.log.Warn("cache backend error: computing instead", "op", op, "kind", k.Kind, "model", prefix(k.Model), "err", err,
		"suppressed", n, "log_every", cacheLogEvery.String())
}

// onIntegrityFailure is the cache's OnIntegrityFailure: the refused entry
// is counted by tier and reason and logged at most once per cacheLogEvery.
func (s *Service) onIntegrityFailure(k cache.Key, err *cache.IntegrityError) {
	s.met.cacheIntegrity.WithLabelValues(err.Tier, err.Reason).Inc()
	ok, n := s.integrityLog.allow()
	if !ok {
		return
	}
	s.log.Error("cache entry refused: not served, computing instead", "tier", err.Tier, "reason", err.Reason,
		"kind", k.Kind, "model", prefix(k.Model), "err", errors.Unwrap(err), "suppressed", n, "log_every", cacheLogEvery.String())
}
