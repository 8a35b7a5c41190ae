// A small bounded LRU for the reduction cache.

package mesh

import (
	"container/list"
	"sync"
)

// lru is a small mutex-guarded LRU bounded by entry count and, when size
// is set, by the sum of the entries' sizes.
type lru[V any] struct {
	mu       sync.Mutex // guards ll, items and bytes
	max      int
	maxBytes int
	size     func(V) int // nil: entries have no size
	bytes    int
	ll       *list.List
	items    map[string]*list.Element
}

type lruEntry[V any] struct {
	key string
	val V
}

func newLRU[V any](max int) *lru[V] {
	return &lru[V]{max: max, ll: list.New(), items: map[string]*list.Element{}}
}

func newSizedLRU[V any](max, maxBytes int, size func(V) int) *lru[V] {
	c := newLRU[V](max)
	c.maxBytes, c.size = maxBytes, size
	return c
}

func (c *lru[V]) sizeOf(v V) int {
	if c.size == nil {
		return 0
	}
	return c.size(v)
}

func (c *lru[V]) get(key string) (V, bool) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if e, ok := c.items[key]; ok {
		c.ll.MoveToFront(e)
		return e.Value.(*lruEntry[V]).val, true
	}
	var zero V
	return zero, false
}

func (c *lru[V]) put(key string, v V) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if c.size != nil && c.sizeOf(v) > c.maxBytes {
		return // larger than the whole cache: not kept
	}
	if e, ok := c.items[key]; ok {
		old := e.Value.(*lruEntry[V])
		c.bytes += c.sizeOf(v) - c.sizeOf(old.val)
		old.val = v
		c.ll.MoveToFront(e)
	} else {
		c.items[key] = c.ll.PushFront(&lruEntry[V]{key, v})
		c.bytes += c.sizeOf(v)
	}
	for c.ll.Len() > c.max || (c.size != nil && c.bytes > c.maxBytes) {
		e := c.ll.Back()
		c.ll.Remove(e)
		ent := e.Value.(*lruEntry[V])
		delete(c.items, ent.key)
		c.bytes -= c.sizeOf(ent.val)
	}
}
