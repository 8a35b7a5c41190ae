package server

import (
	"bytes"
	"encoding/json"
	"log/slog"
	"strings"
	"sync"
	"testing"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
)

// syncBuffer is a bytes.Buffer safe for the server's goroutines.
type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) lines() []string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return strings.Split(strings.TrimSpace(s.b.String()), "\n")
}

// TestCallLog: every call writes one JSON line with method, code,
// duration and the model hash prefix.
func TestCallLog(t *testing.T) {
	var buf syncBuffer
	ts := startServer(t, Config{Logger: slog.New(slog.NewJSONHandler(&buf, nil))})
	ctx := testContext(t)
	chunks, err := collectModes(ctx, ts.api, modesReq(t))
	if err != nil {
		t.Fatal(err)
	}
	_, err = collectModes(ctx, ts.api, &modegridv1.ComputeModesRequest{Qpoints: qlist(0)})
	if status.Code(err) != codes.InvalidArgument {
		t.Fatalf("got %v; want InvalidArgument", err)
	}
	type line struct {
		Msg, Level, Method, Code, Model, Error string
		DurationMS                             *float64 `json:"duration_ms"`
	}
	var calls []line
	for _, l := range buf.lines() {
		var rec line
		if err := json.Unmarshal([]byte(l), &rec); err != nil {
			t.Fatalf("log line %q is not JSON: %v", l, err)
		}
		if rec.Msg == "call" {
			calls = append(calls, rec)
		}
	}
	if len(calls) != 2 {
		t.Fatalf("%d call lines; want 2", len(calls))
	}
	ok, bad := calls[0], calls[1]
	if ok.Method != "/modegrid.v1.ModegridService/ComputeModes" || ok.Code != "OK" || ok.DurationMS == nil || *ok.DurationMS < 0 {
		t.Errorf("first line %+v; want method, OK and a duration", ok)
	}
	if ok.Model == "" || !strings.HasPrefix(chunks[0].GetModelHash(), ok.Model) || len(ok.Model) != 12 {
		t.Errorf("model %q; want the 12-character prefix of %s", ok.Model, chunks[0].GetModelHash())
	}
	if bad.Code != "InvalidArgument" || !strings.Contains(bad.Error, "model") {
		t.Errorf("second line %+v; want InvalidArgument with the message", bad)
	}
}
