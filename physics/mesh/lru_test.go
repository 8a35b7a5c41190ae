package mesh

import "testing"

// TestSizedLRU: the reduced-grid cache evicts by bytes as well as by count
// (common practice for bounded caches).
func TestSizedLRU(t *testing.T) {
	c := newSizedLRU[[]byte](10, 100, func(b []byte) int { return len(b) })
	c.put("a", make([]byte, 60))
	c.put("b", make([]byte, 30))
	if _, ok := c.get("a"); !ok {
		t.Fatal("a evicted too early")
	}
	c.put("c", make([]byte, 30)) // 120 bytes: evict the least recent, b
	if _, ok := c.get("b"); ok {
		t.Error("b kept past the byte bound")
	}
	if c.bytes != 90 {
		t.Errorf("bytes = %d; want 90", c.bytes)
	}
	c.put("huge", make([]byte, 200))
	if _, ok := c.get("huge"); ok {
		t.Error("an entry larger than the bound was kept")
	}
}
