package cache

import "container/list"

// lru is a byte-bounded least-recently-used map. It is not safe for
// concurrent use; Cache guards it with its mutex. The zero value is not
// usable: make one with newLRU.
type lru struct {
	maxBytes int64 // bound on the sum of entry sizes; ≤ 0 stores nothing
	bytes    int64 // sum of the sizes of the entries held
	ll       *list.List
	items    map[string]*list.Element
	// onEvict is called for every entry dropped to make room (not for
	// replaced or refused entries).
	onEvict func(e *entry)
}

// entry is one cached value with its full key and the size charged for it.
type entry struct {
	key   string // full.String(), the LRU's index
	full  Key    // the whole key, checked on every read
	kind  string
	value any
	size  int64
}

func newLRU(maxBytes int64, onEvict func(*entry)) *lru {
	return &lru{maxBytes: maxBytes, ll: list.New(), items: map[string]*list.Element{}, onEvict: onEvict}
}

// get returns the entry under key and marks it most recently used.
func (c *lru) get(key string) (*entry, bool) {
	el, ok := c.items[key]
	if !ok {
		return nil, false
	}
	c.ll.MoveToFront(el)
	return el.Value.(*entry), true
}

// add stores e, replacing any entry under the same key, and evicts least
// recently used entries until the bound holds. An entry larger than the
// whole bound is not stored; add reports whether e was stored.
func (c *lru) add(e *entry) bool {
	if e.size > c.maxBytes {
		c.remove(e.key)
		return false
	}
	if el, ok := c.items[e.key]; ok {
		old := el.Value.(*entry)
		c.bytes += e.size - old.size
		el.Value = e
		c.ll.MoveToFront(el)
	} else {
		c.items[e.key] = c.ll.PushFront(e)
		c.bytes += e.size
	}
	for c.bytes > c.maxBytes {
		back := c.ll.Back()
		old := back.Value.(*entry)
		c.ll.Remove(back)
		delete(c.items, old.key)
		c.bytes -= old.size
		if c.onEvict != nil {
			c.onEvict(old)
		}
	}
	return true
}

// remove drops the entry under key, if any.
func (c *lru) remove(key string) {
	if el, ok := c.items[key]; ok {
		c.ll.Remove(el)
		delete(c.items, key)
		c.bytes -= el.Value.(*entry).size
	}
}

// len is the number of entries held.
func (c *lru) len() int { return c.ll.Len() }
