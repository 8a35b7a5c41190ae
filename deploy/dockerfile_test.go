package deploy

import (
	"bufio"
	"debug/elf"
	"fmt"
	"os"
	"os/exec"
	"path"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"testing"
	"time"
)

// instruction is one Dockerfile instruction with continuation lines joined.
type instruction struct {
	cmd  string // upper case: FROM, RUN, ...
	args string
	line int
}

// stage is one build stage: its FROM image, its name and its instructions.
type stage struct {
	image string
	name  string
	instr []instruction
}

// dockerfile is a parsed Dockerfile: global ARG defaults (before the first
// FROM) and the stages in order.
type dockerfile struct {
	args   map[string]string
	stages []*stage
}

// parseDockerfile reads the subset of Dockerfile syntax deploy/Dockerfile
// uses: comments, backslash continuations, one instruction per logical line.
func parseDockerfile(file string) (*dockerfile, error) {
	f, err := os.Open(file)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	df := &dockerfile{args: map[string]string{}}
	sc := bufio.NewScanner(f)
	var cur strings.Builder
	start, n := 0, 0
	flush := func() error {
		text := strings.TrimSpace(cur.String())
		cur.Reset()
		if text == "" {
			return nil
		}
		cmd, args, _ := strings.Cut(text, " ")
		in := instruction{cmd: strings.ToUpper(cmd), args: strings.TrimSpace(args), line: start}
		switch {
		case in.cmd == "FROM":
			fields := strings.Fields(in.args)
			s := &stage{image: fields[0]}
			if len(fields) == 3 && strings.EqualFold(fields[1], "AS") {
				s.name = fields[2]
			}
			df.stages = append(df.stages, s)
		case len(df.stages) == 0 && in.cmd == "ARG":
			k, v, _ := strings.Cut(in.args, "=")
			df.args[k] = v
		case len(df.stages) == 0:
			return fmt.Errorf("line %d: %s before the first FROM", in.line, in.cmd)
		default:
			s := df.stages[len(df.stages)-1]
			s.instr = append(s.instr, in)
		}
		return nil
	}
	for sc.Scan() {
		n++
		line := sc.Text()
		trimmed := strings.TrimSpace(line)
		if strings.HasPrefix(trimmed, "#") || (trimmed == "" && cur.Len() == 0) {
			continue
		}
		if cur.Len() == 0 {
			start = n
		}
		if strings.HasSuffix(trimmed, "\\") {
			cur.WriteString(strings.TrimSuffix(trimmed, "\\") + " ")
			continue
		}
		cur.WriteString(trimmed)
		if err := flush(); err != nil {
			return nil, err
		}
	}
	if err := sc.Err(); err != nil {
		return nil, err
	}
	if cur.Len() > 0 {
		return nil, fmt.Errorf("line %d: continuation at end of file", start)
	}
	return df, flush()
}

// env returns the ENV settings of a stage (KEY=VALUE pairs, space-separated).
func (s *stage) env() map[string]string {
	m := map[string]string{}
	for _, in := range s.instr {
		if in.cmd != "ENV" {
			continue
		}
		for _, kv := range shellWords(in.args) {
			k, v, _ := strings.Cut(kv, "=")
			m[k] = v
		}
	}
	return m
}

// all returns the arguments of every instruction cmd in the stage.
func (s *stage) all(cmd string) []string {
	var out []string
	for _, in := range s.instr {
		if in.cmd == cmd {
			out = append(out, in.args)
		}
	}
	return out
}

// shellWords splits a command line the way sh does for the plain words,
// double- and single-quoted strings used in deploy/Dockerfile.
func shellWords(s string) []string {
	var words []string
	var cur strings.Builder
	inWord := false
	var quote rune
	for _, r := range s {
		switch {
		case quote != 0 && r == quote:
			quote = 0
		case quote != 0:
			cur.WriteRune(r)
		case r == '"' || r == '\'':
			quote, inWord = r, true
		case r == ' ' || r == '\t':
			if inWord {
				words = append(words, cur.String())
				cur.Reset()
				inWord = false
			}
		default:
			cur.WriteRune(r)
			inWord = true
		}
	}
	if inWord {
		words = append(words, cur.String())
	}
	return words
}

// goBuildCommand turns the build stage's `go build` RUN line into a command
// run on this machine: BuildKit --mount flags dropped, ${VERSION} replaced by
// version, the -o path replaced by out, the stage's ENV (CGO_ENABLED=0 ...)
// applied, run from the repository root.
func (df *dockerfile) goBuildCommand(out, version string) (*exec.Cmd, error) {
	var run string
	var st *stage
	for _, s := range df.stages {
		for _, r := range s.all("RUN") {
			if strings.Contains(r, "go build") {
				run, st = r, s
			}
		}
	}
	if run == "" {
		return nil, fmt.Errorf("no RUN go build in any stage")
	}
	words := shellWords(run)
	for len(words) > 0 && strings.HasPrefix(words[0], "--mount=") {
		words = words[1:]
	}
	if len(words) < 2 || words[0] != "go" || words[1] != "build" {
		return nil, fmt.Errorf("RUN line does not start with go build: %q", run)
	}
	args := words[1:]
	for i, a := range args {
		args[i] = strings.ReplaceAll(a, "${VERSION}", version)
		if a == "-o" && i+1 < len(args) {
			args[i+1] = out
		}
	}
	cmd := exec.Command("go", args...)
	cmd.Dir = repoRoot
	cmd.Env = os.Environ()
	for k, v := range st.env() {
		cmd.Env = append(cmd.Env, k+"="+v)
	}
	return cmd, nil
}

// TestDockerfile checks deploy/Dockerfile statically (no Docker engine runs
// here): a build stage on the Go toolchain named in go.mod or newer installs
// OpenBLAS and compiles a trimmed, version-stamped binary of
// ./server/cmd/modegridd with cgo and the lapack tag (the build that ships:
// physics/eigen); the final stage is distroless with the C library and no
// shell, with the nonroot user, copies only that binary and the libraries
// staged beside it into a directory its LD_LIBRARY_PATH names, exposes the
// gRPC and metrics ports its ENV listens on, and nothing mentions GPU or
// CUDA layers.
func TestDockerfile(t *testing.T) {
	file := filepath.Join(repoRoot, "deploy", "Dockerfile")
	df, err := parseDockerfile(file)
	if err != nil {
		t.Fatal(err)
	}
	if len(df.stages) < 2 {
		t.Fatalf("%d stages; want a multi-stage build (build + run)", len(df.stages))
	}
	buildSt, runSt := df.stages[0], df.stages[len(df.stages)-1]
	raw, err := os.ReadFile(file)
	if err != nil {
		t.Fatal(err)
	}

	t.Run("build stage", func(t *testing.T) {
		img := expandArgs(buildSt.image, df.args)
		m := regexp.MustCompile(`^golang:(\d+\.\d+(?:\.\d+)?)-`).FindStringSubmatch(img)
		if m == nil {
			t.Fatalf("build stage FROM %q; want the official golang image with a version tag", img)
		}
		if want := goModVersion(t); versionLess(m[1], want) {
			t.Errorf("build image Go %s is older than go.mod's toolchain %s", m[1], want)
		}
		if buildSt.name == "" {
			t.Error("build stage has no name (FROM ... AS build) for COPY --from")
		}
		if got := buildSt.env()["CGO_ENABLED"]; got != "1" {
			t.Errorf("build stage ENV CGO_ENABLED=%q; want 1 (the lapack build links OpenBLAS through cgo)", got)
		}
		var run string
		installs := false
		for _, r := range buildSt.all("RUN") {
			if strings.Contains(r, "go build") {
				run = r
			}
			if strings.Contains(r, "apt-get install") && slices.Contains(shellWords(r), "libopenblas-dev") {
				installs = true
			}
		}
		if !installs {
			t.Error("build stage does not apt-get install libopenblas-dev (the library the lapack build links)")
		}
		for _, want := range []string{"-tags lapack", "-trimpath", "-X main.version=${VERSION}", "-s -w", "./server/cmd/modegridd"} {
			if !strings.Contains(run, want) {
				t.Errorf("go build line %q lacks %q", run, want)
			}
		}
		if !slices.ContainsFunc(buildSt.all("ARG"), func(a string) bool { return strings.HasPrefix(a, "VERSION") }) {
			t.Error("build stage has no ARG VERSION to stamp the version")
		}
	})

	t.Run("run stage", func(t *testing.T) {
		if !strings.HasPrefix(runSt.image, "gcr.io/distroless/cc-debian12") || !strings.HasSuffix(runSt.image, ":nonroot") {
			t.Errorf("run stage FROM %q; want gcr.io/distroless/cc-debian12:nonroot (glibc of the build image's Debian 12, no shell, non-root)", runSt.image)
		}
		users := runSt.all("USER")
		if len(users) == 0 {
			t.Error("run stage sets no USER")
		}
		for _, u := range users {
			if name, _, _ := strings.Cut(u, ":"); name != "nonroot" && name != "65532" {
				t.Errorf("run stage USER %q; want nonroot (65532)", u)
			}
		}
		for _, in := range runSt.instr {
			if in.cmd == "RUN" {
				t.Errorf("line %d: RUN in the run stage (distroless has no shell)", in.line)
			}
			if in.cmd == "COPY" && !strings.HasPrefix(in.args, "--from="+buildSt.name+" ") {
				t.Errorf("line %d: COPY %s; the run stage should copy only the binary and its libraries from the build stage", in.line, in.args)
			}
		}
		libDir := runStageLibDir(df)
		if libDir == "" {
			t.Errorf("run stage copies no %s from the build stage", stagedLibDir)
		} else if !slices.Contains(strings.Split(runSt.env()["LD_LIBRARY_PATH"], ":"), strings.TrimSuffix(libDir, "/")) {
			t.Errorf("run stage copies the libraries to %s, which its LD_LIBRARY_PATH %q does not name", libDir, runSt.env()["LD_LIBRARY_PATH"])
		}
		var ports []string
		for _, e := range runSt.all("EXPOSE") {
			ports = append(ports, strings.Fields(e)...)
		}
		env := runSt.env()
		for _, key := range []string{"MODEGRID_LISTEN", "MODEGRID_METRICS_LISTEN"} {
			_, port, err := splitHostPort(env[key])
			if err != nil {
				t.Errorf("ENV %s=%q: %v", key, env[key], err)
				continue
			}
			if !slices.Contains(ports, port) && !slices.Contains(ports, port+"/tcp") {
				t.Errorf("ENV %s listens on port %s, which is not in EXPOSE %v", key, port, ports)
			}
		}
		if len(ports) != 2 {
			t.Errorf("EXPOSE %v; want exactly the gRPC and the metrics port", ports)
		}
		ep := runSt.all("ENTRYPOINT")
		if len(ep) != 1 || !strings.HasPrefix(ep[0], "[") {
			t.Errorf("ENTRYPOINT %v; want one, in exec form (no shell to run a string)", ep)
		}
	})

	t.Run("no GPU layers", func(t *testing.T) {
		if m := regexp.MustCompile(`(?i)cuda|nvidia|\bgpu\b`).FindAllString(stripComments(string(raw)), -1); len(m) > 0 {
			t.Errorf("Dockerfile instructions mention %v; the image must be CPU-only", m)
		}
	})
}

// stagedLibDir is where the build stage collects the shared libraries the
// run stage copies.
const stagedLibDir = "/out/lib/"

// runStageLibDir returns where the run stage copies stagedLibDir to ("" if
// it does not).
func runStageLibDir(df *dockerfile) string {
	for _, c := range df.stages[len(df.stages)-1].all("COPY") {
		w := shellWords(c)
		if len(w) == 3 && strings.HasPrefix(w[0], "--from=") && w[1] == stagedLibDir {
			return w[2]
		}
	}
	return ""
}

// stagedLibs returns the files the build stage copies into stagedLibDir
// (the arguments of its `cp -L … /out/lib/` line).
func stagedLibs(df *dockerfile) []string {
	for _, r := range df.stages[0].all("RUN") {
		for _, cmd := range strings.Split(r, "&&") {
			w := shellWords(strings.TrimSpace(cmd))
			if len(w) > 3 && w[0] == "cp" && w[1] == "-L" && w[len(w)-1] == stagedLibDir {
				return w[2 : len(w)-1]
			}
		}
	}
	return nil
}

// baseImageLibs are the shared libraries gcr.io/distroless/cc-debian12
// provides (its packages libc6 and libgcc-s1), with the kernel's vDSO.
var baseImageLibs = []string{"linux-vdso.so.1", "ld-linux-x86-64.so.2", "libc.so.6", "libm.so.6",
	"libpthread.so.0", "libdl.so.2", "librt.so.1", "libgcc_s.so.1"}

// stripComments drops comment lines, which may say what the image is not.
func stripComments(s string) string {
	var b strings.Builder
	for _, l := range strings.Split(s, "\n") {
		if !strings.HasPrefix(strings.TrimSpace(l), "#") {
			b.WriteString(l + "\n")
		}
	}
	return b.String()
}

func splitHostPort(hp string) (string, string, error) {
	i := strings.LastIndex(hp, ":")
	if i < 0 || i == len(hp)-1 {
		return "", "", fmt.Errorf("not host:port")
	}
	return hp[:i], hp[i+1:], nil
}

// expandArgs replaces ${NAME} with the global ARG defaults.
func expandArgs(s string, args map[string]string) string {
	for k, v := range args {
		s = strings.ReplaceAll(s, "${"+k+"}", v)
	}
	return s
}

// goModVersion returns the Go version go.mod builds with: its toolchain
// directive (without the "go" prefix) when it has one, else its go
// directive (the oldest Go the module accepts).
func goModVersion(t *testing.T) string {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(repoRoot, "go.mod"))
	if err != nil {
		t.Fatal(err)
	}
	if m := regexp.MustCompile(`(?m)^toolchain go(\S+)$`).FindSubmatch(b); m != nil {
		return string(m[1])
	}
	m := regexp.MustCompile(`(?m)^go (\S+)$`).FindSubmatch(b)
	if m == nil {
		t.Fatal("no go directive in go.mod")
	}
	return string(m[1])
}

// versionLess compares dotted numeric versions ("1.26" < "1.26.7").
func versionLess(a, b string) bool {
	pa, pb := strings.Split(a, "."), strings.Split(b, ".")
	for i := range max(len(pa), len(pb)) {
		var x, y int
		if i < len(pa) {
			fmt.Sscan(pa[i], &x)
		}
		if i < len(pb) {
			fmt.Sscan(pb[i], &y)
		}
		if x != y {
			return x < y
		}
	}
	return false
}

func TestVersionLess(t *testing.T) {
	tests := []struct {
		name string
		a, b string
		want bool
	}{
		{name: "patch older", a: "1.26.7", b: "1.26.8", want: true},
		{name: "equal", a: "1.26.8", b: "1.26.8", want: false},
		{name: "minor only equals .0", a: "1.26", b: "1.26.0", want: false},
		{name: "minor older than patch", a: "1.26", b: "1.26.7", want: true},
		{name: "newer minor", a: "1.27", b: "1.26.9", want: false},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			if got := versionLess(tc.a, tc.b); got != tc.want {
				t.Errorf("versionLess(%q, %q) = %v; want %v", tc.a, tc.b, got, tc.want)
			}
		})
	}
}

// TestShellWords covers the quoting deploy/Dockerfile uses.
func TestShellWords(t *testing.T) {
	tests := []struct {
		name string
		in   string
		want []string
	}{
		{name: "plain", in: "go build -o x", want: []string{"go", "build", "-o", "x"}},
		{name: "double quotes", in: `-ldflags "-s -w -X main.version=${VERSION}" -o /out`, want: []string{"-ldflags", "-s -w -X main.version=${VERSION}", "-o", "/out"}},
		{name: "empty quoted", in: `--save "" x`, want: []string{"--save", "", "x"}},
		{name: "env pairs", in: "A=0 B=-x", want: []string{"A=0", "B=-x"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			if got := shellWords(tc.in); !slices.Equal(got, tc.want) {
				t.Errorf("shellWords(%q) = %q; want %q", tc.in, got, tc.want)
			}
		})
	}
}

// TestDockerignore: the build context keeps what go build needs (go.mod,
// go.sum, the packages of modegridd) and leaves out version control, build
// outputs and test binaries.
func TestDockerignore(t *testing.T) {
	b, err := os.ReadFile(filepath.Join(repoRoot, ".dockerignore"))
	if err != nil {
		t.Fatal(err)
	}
	var patterns []string
	for _, l := range strings.Split(string(b), "\n") {
		if l = strings.TrimSpace(l); l != "" && !strings.HasPrefix(l, "#") {
			patterns = append(patterns, l)
		}
	}
	tests := []struct {
		name     string
		path     string
		excluded bool
	}{
		{name: "git metadata", path: ".git/HEAD", excluded: true},
		{name: "built binaries", path: "bin/modegridd", excluded: true},
		{name: "test binary", path: "server/server.test", excluded: true},
		{name: "CI scripts", path: ".ci/run", excluded: true},
		{name: "go.mod", path: "go.mod", excluded: false},
		{name: "go.sum", path: "go.sum", excluded: false},
		{name: "server main", path: "server/cmd/modegridd/main.go", excluded: false},
		{name: "server package", path: "server/server.go", excluded: false},
		{name: "physics", path: "physics/model.go", excluded: false},
		{name: "generated protos", path: "proto/modegrid/v1/service.pb.go", excluded: false},
		{name: "embedded examples", path: "proto/examples/fcc.json", excluded: false},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			if got := dockerIgnored(patterns, tc.path); got != tc.excluded {
				t.Errorf("%s excluded = %v; want %v (patterns %q)", tc.path, got, tc.excluded, patterns)
			}
		})
	}
}

// dockerIgnored applies .dockerignore rules to a context path: a pattern
// (path.Match syntax, "**/" matching any directories) excludes the path or
// any of its parent directories; a later "!pattern" re-includes.
func dockerIgnored(patterns []string, p string) bool {
	ignored := false
	for _, pat := range patterns {
		neg := strings.HasPrefix(pat, "!")
		pat = strings.TrimPrefix(pat, "!")
		if matchDockerPattern(pat, p) {
			ignored = !neg
		}
	}
	return ignored
}

func matchDockerPattern(pat, p string) bool {
	for q := p; q != "." && q != "/"; q = path.Dir(q) {
		if ok, _ := path.Match(pat, q); ok {
			return true
		}
		if rest, found := strings.CutPrefix(pat, "**/"); found {
			parts := strings.Split(q, "/")
			for i := range parts {
				if ok, _ := path.Match(rest, strings.Join(parts[i:], "/")); ok {
					return true
				}
			}
		}
	}
	return false
}

// TestDaemonBinary builds modegridd with the Dockerfile's own go build
// command and checks the result: an ELF binary linked dynamically only to
// the C library and OpenBLAS; every shared library it needs on this machine
// (ldd, the same Debian 12 packages as the build image) is either in the
// base image or staged by the build stage for the run stage, and the staged
// files exist; built with -trimpath (no build-machine paths inside),
// carrying the stamped version; started with only the container's
// environment (ports moved to free loopback ones), it logs that it runs on
// the LAPACK eigensolver, reports SERVING on the gRPC health service and
// exits with status 0 on SIGTERM.
func TestDaemonBinary(t *testing.T) {
	bin := daemonBinary(t)
	f, err := elf.Open(bin)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	libs, err := f.ImportedLibraries()
	if err != nil {
		t.Fatal(err)
	}
	for _, l := range libs {
		if !slices.Contains([]string{"libopenblas.so.0", "libc.so.6", "libm.so.6", "libpthread.so.0", "libdl.so.2"}, l) {
			t.Errorf("binary needs %s; want only the C library and OpenBLAS", l)
		}
	}
	if !slices.Contains(libs, "libopenblas.so.0") {
		t.Errorf("binary links %v, not OpenBLAS: not the lapack build", libs)
	}
	raw, err := os.ReadFile(bin)
	if err != nil {
		t.Fatal(err)
	}
	if abs, _ := filepath.Abs(repoRoot); strings.Contains(string(raw), abs) {
		t.Errorf("binary contains the build path %s: not built with -trimpath", abs)
	}
	if !strings.Contains(string(raw), testVersion) {
		t.Errorf("binary does not contain the stamped version %q (is main.version defined?)", testVersion)
	}

	t.Run("image carries its libraries", func(t *testing.T) {
		df, err := parseDockerfile(filepath.Join(repoRoot, "deploy", "Dockerfile"))
		if err != nil {
			t.Fatal(err)
		}
		staged := map[string]bool{}
		for _, p := range stagedLibs(df) {
			if _, err := os.Stat(p); err != nil {
				t.Errorf("the build stage stages %s, absent here: %v", p, err)
			}
			staged[path.Base(p)] = true
		}
		out, err := exec.Command("ldd", bin).CombinedOutput()
		if err != nil {
			t.Fatalf("ldd %s: %v\n%s", bin, err, out)
		}
		for _, line := range strings.Split(strings.TrimSpace(string(out)), "\n") {
			name := path.Base(strings.Fields(line)[0])
			if strings.Contains(line, "not found") {
				t.Errorf("ldd: %s not found on this machine (is libopenblas-dev installed?)", name)
			}
			if !slices.Contains(baseImageLibs, name) && !staged[name] {
				t.Errorf("the binary needs %s, which neither the base image has nor the build stage stages", name)
			}
		}
	})

	t.Run("version flag", func(t *testing.T) {
		out, err := exec.Command(bin, "--version").CombinedOutput()
		if err != nil {
			t.Fatalf("modegridd --version: %v\n%s", err, out)
		}
		if !strings.Contains(string(out), testVersion) {
			t.Errorf("modegridd --version printed %q; want it to contain %q", out, testVersion)
		}
	})

	t.Run("serves and stops on SIGTERM", func(t *testing.T) {
		df, err := parseDockerfile(filepath.Join(repoRoot, "deploy", "Dockerfile"))
		if err != nil {
			t.Fatal(err)
		}
		// The container's environment, with its listen addresses moved to
		// free loopback ports (startDaemon's MODEGRID_LISTEN and
		// MODEGRID_METRICS_LISTEN come after and win).
		var env []string
		for k, v := range df.stages[len(df.stages)-1].env() {
			env = append(env, k+"="+v)
		}
		d := startDaemon(t, daemonConfig{name: "container-like", env: env})
		if !strings.Contains(d.logs.String(), `"eigensolver":"lapack"`) {
			t.Errorf("the startup log does not name the LAPACK eigensolver:\n%s", d.logs.String())
		}
		if err := d.terminate(30 * time.Second); err != nil {
			t.Fatalf("after SIGTERM: %v; want exit status 0\nlog:\n%s", err, d.logs.String())
		}
	})
}
