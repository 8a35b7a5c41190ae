package cache

import "context"

// Backend is an optional second-level store shared between server replicas
// (for example Redis): the in-process LRU is consulted first, the Backend
// after it misses, and computed results are written to both. Values are
// serialised protobuf messages; keys are the cache's own string keys.
//
// A Backend is a performance aid only: every error is logged and counted by
// the caller and the request is then computed as if the key were absent, so
// an implementation may fail at any time without failing a request.
type Backend interface {
	// Get returns the value stored under key and true, or false when the
	// key is absent (or expired). err is non-nil only for a failure of the
	// store itself, never for a plain miss.
	Get(ctx context.Context, key string) ([]byte, bool, error)
	// Set stores value under key. An implementation may refuse values it
	// considers too large by returning nil without storing them.
	Set(ctx context.Context, key string, value []byte) error
}
