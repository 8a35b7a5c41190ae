package main

import (
	"context"
	"net"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"google.golang.org/protobuf/proto"

	"github.com/materials-lab/modegrid/client"
	modegridv1 "github.com/materials-lab/modegrid/proto/modegrid/v1"
	"github.com/materials-lab/modegrid/server"
)

// bigChain is the diatomic chain example (Kittel, Introduction to Solid
// State Physics, ch. 4: masses 20 and 50 amu, springs K = 2 eV/Å²) as a
// supercell force-constant set of 32 cells with every pair's block: about
// 300 KB of protobuf binary, written to a .pb file.
func bigChain(t *testing.T) string {
	t.Helper()
	c, err := client.LoadModel(example("diatomic-chain"))
	if err != nil {
		t.Fatal(err)
	}
	c.Springs = nil
	const n = 64
	fc := &modegridv1.SupercellForceConstants{Matrix: []int32{n / 2}, Phi: make([]float64, 9*n*n)}
	for i := range n {
		fc.Atoms = append(fc.Atoms, &modegridv1.SupercellAtom{Position: []float64{2.5 * float64(i), 0, 0}})
		fc.Phi[9*(i*n+i)] = 4
		fc.Phi[9*(i*n+(i+1)%n)] = -2
		fc.Phi[9*(i*n+(i+n-1)%n)] = -2
	}
	c.SupercellFc = fc
	b, err := proto.Marshal(c)
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "big-chain.pb")
	if err := os.WriteFile(path, b, 0o600); err != nil {
		t.Fatal(err)
	}
	return path
}

// serve runs a real modegrid server with cfg on loopback and returns its
// address.
func serve(t *testing.T, cfg server.Config) string {
	t.Helper()
	cfg.MetricsListen = "off"
	srv, err := server.New(cfg)
	if err != nil {
		t.Fatal(err)
	}
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	served := make(chan struct{})
	go func() {
		defer close(served)
		srv.Serve(lis)
	}()
	t.Cleanup(func() {
		ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
		defer cancel()
		srv.Shutdown(ctx)
		<-served
	})
	return lis.Addr().String()
}

// TestBigModelCommands: against a server whose message cap (64 KiB) the
// model is over, modes, dos, thermal and check take it through the upload
// stream without a flag and print what a server with the default cap,
// sent the model inline, prints; upload prints the hash check reports.
// (Both servers stream modes in messages of 16 KiB, the small cap's
// default, so that check's typical costs agree.)
func TestBigModelCommands(t *testing.T) {
	model := bigChain(t)
	addr := serve(t, server.Config{MaxMsgBytes: 64 << 10})
	ref := serve(t, server.Config{MaxChunkBytes: 16 << 10})
	for _, args := range [][]string{
		{"modes", "-m", model, "--q", "0.1;0.5", "--format", "csv"},
		{"dos", "-m", model, "--grid", "64", "--format", "csv"},
		{"thermal", "-m", model, "--grid", "64", "--temps", "100,300", "--format", "csv"},
		{"check", "-m", model, "--format", "csv"},
	} {
		code, want, stderr := runCLI(t, append(args, "--server", ref)...)
		if code != exitOK {
			t.Fatalf("%s, inline: exit %d; %s", args[0], code, stderr)
		}
		code, got, stderr := runCLI(t, append(args, "--server", addr)...)
		if code != exitOK || got != want {
			t.Errorf("%s over the cap: exit %d, output\n%s\nwant\n%s\nstderr: %s", args[0], code, got, want, stderr)
		}
	}
	code, out, stderr := runCLI(t, "upload", "--server", addr, "-m", model, "--format", "csv")
	if code != exitOK || stderr != "" {
		t.Fatalf("upload: exit %d; stderr %s", code, stderr)
	}
	_, check, _ := runCLI(t, "check", "--server", addr, "-m", model, "--format", "csv")
	hash := csvValue(t, out, "model_hash")
	if hash == "" || hash != csvValue(t, check, "model_hash") || csvValue(t, out, "supercell_atoms_mapped") != "64" {
		t.Errorf("upload printed\n%s\ncheck printed\n%s\nwant the same model_hash and 64 atoms mapped", out, check)
	}
	code, _, stderr = runCLI(t, "upload", "-m", model)
	if code != exitOK || !strings.Contains(stderr, "embedded server") {
		t.Errorf("upload without --server: exit %d, stderr %q; want a note on the embedded server", code, stderr)
	}
}

// csvValue is the value of property key in property,value CSV.
func csvValue(t *testing.T, csv, key string) string {
	t.Helper()
	for _, line := range strings.Split(csv, "\n") {
		if k, v, ok := strings.Cut(line, ","); ok && k == key {
			return v
		}
	}
	return ""
}
