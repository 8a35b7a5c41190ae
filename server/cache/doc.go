// Package cache holds modegrid's result cache: a byte-bounded LRU of
// computed values keyed by (model hash, canonical parameters), a flight
// group so that concurrent identical requests compute once, and an optional
// second-level Backend shared between replicas.
//
// The cache never changes an answer: losing it, or any error of the
// Backend, only costs the time to compute again.
package cache
