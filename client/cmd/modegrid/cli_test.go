package main

import (
	"bytes"
	"net"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// The CLI tests run the command in-process: run() starts the embedded
// server in-process and calls it over real gRPC through an in-memory
// connection, as the binary does.

func runCLI(t *testing.T, args ...string) (int, string, string) {
	t.Helper()
	var out, errb bytes.Buffer
	code := run(args, &out, &errb)
	return code, out.String(), errb.String()
}

var exampleDir = filepath.Join("..", "..", "..", "proto", "examples")

func example(name string) string { return filepath.Join(exampleDir, name+".json") }

func testdata(name string) string { return filepath.Join("testdata", name) }

// TestExitCodes: every exit code, with a one-sentence message on stderr
// that starts with "modegrid:" and never a stack trace.
func TestExitCodes(t *testing.T) {
	outDir := filepath.Join(t.TempDir(), "no", "such", "dir")
	tests := []struct {
		name       string
		args       []string
		want       int
		wantStderr []string
		notStderr  []string
	}{
		{name: "success", args: []string{"modes", "-m", example("chain"), "--q", "0.5"}, want: exitOK},
		{name: "help", args: []string{"help"}, want: exitOK},
		{name: "command help", args: []string{"dos", "-h"}, want: exitOK, wantStderr: []string{"usage: modegrid dos", "-per-site"}},
		{name: "no command", args: nil, want: exitUsage, wantStderr: []string{"usage: modegrid"}},
		{name: "unknown command", args: []string{"nonsense"}, want: exitUsage, wantStderr: []string{`unknown command "nonsense"`}},
		{name: "unknown flag", args: []string{"modes", "--frobnicate"}, want: exitUsage, wantStderr: []string{"frobnicate"}},
		{name: "missing model", args: []string{"modes", "--q", "0"}, want: exitUsage, wantStderr: []string{"--model FILE is required"}},
		{name: "model file absent", args: []string{"check", "-m", "no-such-model.json"}, want: exitUsage, wantStderr: []string{"no-such-model.json does not exist"}},
		{name: "bad q", args: []string{"modes", "-m", example("chain"), "--q", "0.5,x"}, want: exitUsage, wantStderr: []string{`--q: q-point 1 "0.5,x": component 2: "x" is not a number`}},
		{name: "no q-set", args: []string{"modes", "-m", example("chain")}, want: exitUsage, wantStderr: []string{"--q, --grid or --cells"}},
		{name: "two q-sets", args: []string{"modes", "-m", example("chain"), "--q", "0", "--grid", "4"}, want: exitUsage, wantStderr: []string{"only one of"}},
		{name: "bad grid", args: []string{"dos", "-m", example("chain"), "--grid", "4x"}, want: exitUsage, wantStderr: []string{"--grid"}},
		{name: "shift without grid", args: []string{"dos", "-m", example("chain"), "--shift"}, want: exitUsage, wantStderr: []string{"--shift needs --grid"}},
		{name: "bad unit", args: []string{"modes", "-m", example("chain"), "--q", "0", "--unit", "hz"}, want: exitUsage, wantStderr: []string{"--unit must be thz, mev or cm-1"}},
		{name: "bad format", args: []string{"modes", "-m", example("chain"), "--q", "0", "--format", "xml"}, want: exitUsage, wantStderr: []string{"--format must be"}},
		{name: "bad plot name", args: []string{"dos", "-m", example("chain"), "--plot", "x.jpg"}, want: exitUsage, wantStderr: []string{".png or .svg"}},
		{name: "bad method", args: []string{"dos", "-m", example("chain"), "--method", "magic"}, want: exitUsage, wantStderr: []string{"--method must be"}},
		{name: "bad temps", args: []string{"thermal", "-m", example("chain"), "--temps", "300:0:10"}, want: exitUsage, wantStderr: []string{"--temps", "below start"}},
		{name: "bad path", args: []string{"path", "-m", example("chain"), "--path", "G"}, want: exitUsage, wantStderr: []string{"at least two corners"}},
		{name: "positional argument", args: []string{"modes", "-m", example("chain"), "--q", "0", "extra"}, want: exitUsage, wantStderr: []string{`unexpected argument "extra"`}},
		{name: "tls without server", args: []string{"modes", "-m", example("chain"), "--q", "0", "--tls"}, want: exitUsage, wantStderr: []string{"need --server"}},
		{name: "invalid model", args: []string{"modes", "-m", testdata("bad.json"), "--q", "0,0"}, want: exitInvalid,
			wantStderr: []string{"lattice", "sites[0].mass_amu: must be > 0, got -1", "sites[1].mass_amu", "springs[0].to_site"}},
		{name: "check invalid model", args: []string{"check", "-m", testdata("bad.json")}, want: exitInvalid,
			wantStderr: []string{"is invalid", "sites[0].mass_amu: must be > 0, got -1", "sites[1].mass_amu", "springs[0].to_site"}},
		{name: "model file syntax", args: []string{"check", "-m", testdata("syntax-error.json")}, want: exitInvalid, wantStderr: []string{"syntax-error.json is not a valid model"}},
		{name: "model file unknown key", args: []string{"check", "-m", testdata("unknown-key.json")}, want: exitInvalid,
			wantStderr: []string{`unknown key "polarisations" at the top level (did you mean "polarizations"?)`}},
		{name: "missing mass", args: []string{"check", "-m", testdata("missing-mass.json")}, want: exitInvalid,
			wantStderr: []string{"sites[0].mass_amu: is required (missing or 0)"}, notStderr: []string{"got 0"}},
		{name: "old spring keys", args: []string{"modes", "-m", testdata("legacy-keys.json"), "--q", "0.5"}, want: exitOK},
		{name: "thermal of a model breaking the sum rule", args: []string{"thermal", "-m", testdata("broken-sum-rule-chain.json"), "--grid", "16", "--temps", "300"}, want: exitInvalid,
			wantStderr: []string{"unstable", "break the acoustic sum rule by 1 eV/Å²", "run with --sum-rule to impose it"}, notStderr: []string{"allow-unstable", "allow_unstable", "enforce_sum_rule"}},
		{name: "sum rule imposed", args: []string{"thermal", "-m", testdata("broken-sum-rule-chain.json"), "--grid", "16", "--temps", "300", "--sum-rule"}, want: exitOK},
		{name: "q past the dimension", args: []string{"modes", "-m", example("chain"), "--q", "0.5,0.5"}, want: exitInvalid, wantStderr: []string{"qpoints", "q2"}},
		{name: "thermal of an unstable model", args: []string{"thermal", "-m", testdata("unstable-chain.json"), "--grid", "32", "--temps", "300"}, want: exitInvalid,
			wantStderr: []string{"unstable", "--allow-unstable"}},
		{name: "unstable model allowed", args: []string{"thermal", "-m", testdata("unstable-chain.json"), "--grid", "32", "--temps", "300", "--allow-unstable"}, want: exitOK,
			wantStderr: []string{"note: ", "imaginary modes on the 32-point grid were left out"}},
		{name: "server unreachable", args: []string{"modes", "--server", closedPort(t), "--wait", "300ms", "-m", example("chain"), "--q", "0.5"}, want: exitUnreachable,
			wantStderr: []string{"server is unreachable", "connection refused"}},
		{name: "output not writable", args: []string{"modes", "-m", example("chain"), "--q", "0.5", "--out", filepath.Join(outDir, "x.csv")}, want: exitOther,
			wantStderr: []string{"cannot write the output"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			code, _, stderr := runCLI(t, tc.args...)
			if code != tc.want {
				t.Fatalf("exit %d; want %d; stderr:\n%s", code, tc.want, stderr)
			}
			for _, s := range tc.wantStderr {
				if !strings.Contains(stderr, s) {
					t.Errorf("stderr does not contain %q:\n%s", s, stderr)
				}
			}
			for _, s := range tc.notStderr {
				if strings.Contains(stderr, s) {
					t.Errorf("stderr contains %q:\n%s", s, stderr)
				}
			}
			if code != exitOK && len(tc.args) > 0 && !strings.HasPrefix(stderr, "modegrid: ") {
				t.Errorf("stderr does not start with \"modegrid: \":\n%s", stderr)
			}
			for _, bad := range []string{"goroutine ", "panic", ".go:"} {
				if strings.Contains(stderr, bad) {
					t.Errorf("stderr looks like a stack trace (%q):\n%s", bad, stderr)
				}
			}
		})
	}
}

// TestQuietStderr: on success with stderr not a terminal, nothing is
// written to stderr (no progress bar in logs).
func TestQuietStderr(t *testing.T) {
	code, out, stderr := runCLI(t, "modes", "-m", example("chain"), "--grid", "16")
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	if stderr != "" {
		t.Errorf("stderr not empty: %q", stderr)
	}
	if out == "" {
		t.Error("no output")
	}
}

// TestOutFile: --out writes the output to a file and nothing to stdout.
func TestOutFile(t *testing.T) {
	file := filepath.Join(t.TempDir(), "modes.csv")
	code, out, stderr := runCLI(t, "modes", "-m", example("chain"), "--q", "0.25;0.5", "--format", "csv", "--out", file)
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	if out != "" {
		t.Errorf("stdout not empty: %q", out)
	}
	b, err := os.ReadFile(file)
	if err != nil {
		t.Fatal(err)
	}
	if lines := strings.Split(strings.TrimSpace(string(b)), "\n"); len(lines) != 3 || lines[0] != "q1,q2,q3,branch,frequency_thz" {
		t.Errorf("file holds %q", b)
	}
}

// closedPort returns a loopback address nothing listens on: a port that was
// just bound and released.
func closedPort(t *testing.T) string {
	t.Helper()
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	addr := lis.Addr().String()
	lis.Close()
	return addr
}
