package main

import (
	"bytes"
	"context"
	"slices"
	"strings"
	"testing"
)

// TestFaultInjectionFlag: the test-only switch is taken only as the exact
// command-line argument (before a "--"), and nothing else turns it on: no
// environment variable (MODEGRID_UNSAFE_FAULT_INJECTION is an unknown
// variable, refused), no listing in -h.
func TestFaultInjectionFlag(t *testing.T) {
	tests := []struct {
		args   []string
		wantOn bool
		rest   []string
	}{
		{args: []string{"--listen", "x", unsafeFaultFlag}, wantOn: true, rest: []string{"--listen", "x"}},
		{args: []string{"--listen", "x"}, rest: []string{"--listen", "x"}},
		{args: []string{"--unsafe-fault-injection=true"}, rest: []string{"--unsafe-fault-injection=true"}},
		{args: []string{"--", unsafeFaultFlag}, rest: []string{"--", unsafeFaultFlag}},
	}
	for _, tt := range tests {
		rest, on := takeFaultFlag(tt.args)
		if on != tt.wantOn || !slices.Equal(rest, tt.rest) {
			t.Errorf("takeFaultFlag(%q) = %q, %v; want %q, %v", tt.args, rest, on, tt.rest, tt.wantOn)
		}
	}
	var errb bytes.Buffer
	if code := run(context.Background(), []string{"-h"}, &bytes.Buffer{}, &errb); code != exitOK || strings.Contains(errb.String(), "injection") {
		t.Errorf("-h: exit %d, mentions fault injection: %v", code, strings.Contains(errb.String(), "injection"))
	}
	t.Setenv("MODEGRID_UNSAFE_FAULT_INJECTION", "true")
	errb.Reset()
	if code := run(context.Background(), []string{"--listen", "127.0.0.1:0", "--metrics-listen", "off"}, &bytes.Buffer{}, &errb); code != exitUsage ||
		!strings.Contains(errb.String(), "MODEGRID_UNSAFE_FAULT_INJECTION") {
		t.Errorf("with MODEGRID_UNSAFE_FAULT_INJECTION set: exit %d, stderr %q; want the variable refused (exit %d)", code, errb.String(), exitUsage)
	}
}
