package importrules

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"go/ast"
	"go/parser"
	"go/token"
	"io"
	"os/exec"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"
)

// module is the path of the main module; every rule speaks of paths
// relative to it.
const module = "github.com/materials-lab/modegrid"

// External import paths the rules name.
const (
	gonum       = "gonum.org/v1/gonum"
	grpcPath    = "google.golang.org/grpc"
	protobuf    = "google.golang.org/protobuf"
	errdetails  = "google.golang.org/genproto/googleapis/rpc/errdetails"
	redisClient = "github.com/redis/go-redis"
)

// Module-relative paths the rules name.
const (
	cliPath      = "client/cmd/modegrid"
	redisBackend = "server/cache/redis"
	serverBinary = "server/cmd/modegridd"
)

// pkg is what `go list -json` reports of one package of the module.
type pkg struct {
	ImportPath   string
	Dir          string
	GoFiles      []string
	Imports      []string
	TestImports  []string
	XTestImports []string
	Deps         []string
	Error        *struct{ Err string }
}

// TestImportRules lists every package of the module with `go list` and
// checks its imports, its tests' imports, the CLI's transitive
// dependencies and the CLI's use of physics against the rules of the
// package documentation. Every violation is reported, not just the first.
func TestImportRules(t *testing.T) {
	pkgs := listModule(t)
	if len(pkgs) < 5 {
		t.Fatalf("go list found %d packages of %s; want the whole module", len(pkgs), module)
	}
	var bad []string
	sawCLI := false
	for _, p := range pkgs {
		path, _ := rel(p.ImportPath)
		bad = append(bad, importViolations(path, p.Imports, false)...)
		bad = append(bad, importViolations(path, append(slices.Clone(p.TestImports), coreXTestImports(path, p.XTestImports)...), true)...)
		bad = append(bad, depViolations(path, p.Deps)...)
		if path == cliPath {
			sawCLI = true
			bad = append(bad, cliPhysicsViolations(t, p, pkgs)...)
		}
	}
	if !sawCLI {
		t.Errorf("go list did not report %s; the CLI rules were not checked", cliPath)
	}
	for _, v := range bad {
		t.Error(v)
	}
}

// listModule runs `go list -json` on every package of the module.
func listModule(t *testing.T) []pkg {
	t.Helper()
	goBin, err := exec.LookPath("go")
	if err != nil {
		t.Fatalf("the go command is needed to list the packages: %v", err)
	}
	cmd := exec.Command(goBin, "list", "-e",
		"-json=ImportPath,Dir,GoFiles,Imports,TestImports,XTestImports,Deps,Error", module+"/...")
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("go list: %v\n%s", err, stderr.String())
	}
	var pkgs []pkg
	for dec := json.NewDecoder(bytes.NewReader(out)); ; {
		var p pkg
		err := dec.Decode(&p)
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			t.Fatalf("decode go list output: %v", err)
		}
		if p.Error != nil {
			t.Errorf("go list %s: %s", p.ImportPath, p.Error.Err)
		}
		pkgs = append(pkgs, p)
	}
	return pkgs
}

// rel returns the module-relative path of an import path ("" for the
// module root) and whether it is in the module at all.
func rel(importPath string) (string, bool) {
	if importPath == module {
		return "", true
	}
	r, ok := strings.CutPrefix(importPath, module+"/")
	return r, ok
}

// isStd reports whether an import path is of the standard library: its
// first element has no dot (the rule cmd/go itself applies).
func isStd(importPath string) bool {
	first, _, _ := strings.Cut(importPath, "/")
	return !strings.Contains(first, ".")
}

// under reports whether path is prefix or below it.
func under(path, prefix string) bool {
	return path == prefix || strings.HasPrefix(path, prefix+"/")
}

// isProgram reports whether a module-relative path is a main package (one
// under a cmd/ directory).
func isProgram(r string) bool {
	return strings.HasPrefix(r, "cmd/") || strings.Contains(r, "/cmd/")
}

// area names the rule set a module-relative package path falls under.
func area(path string) string {
	switch {
	case under(path, "physics"):
		return "physics"
	case under(path, "proto"):
		return "proto"
	case under(path, "server"):
		return "server"
	case path == cliPath:
		return "cli"
	case under(path, "client/cmd"):
		return "client program"
	case under(path, "client"):
		return "client library"
	case under(path, "deploy"):
		return "deploy"
	}
	return ""
}

// importViolations returns the rules broken when the package at the
// module-relative path imports imports (full import paths). test says the
// list is that of the package's tests: only the physics rule and the
// no-program rule apply to tests.
func importViolations(path string, imports []string, test bool) []string {
	what := "imports"
	if test {
		what = "test imports"
	}
	a := area(path)
	if a == "" && !test {
		return []string{fmt.Sprintf("package %q is outside physics/, proto/, server/, client/ and deploy/", path)}
	}
	var bad []string
	for _, imp := range imports {
		if why := importRule(a, path, imp, test); why != "" {
			bad = append(bad, fmt.Sprintf("%s %s %s: %s", path, what, imp, why))
		}
	}
	return bad
}

// coreXTestImports drops the test models from the imports of the core's
// external tests (package physics_test): they use the core's exported API
// and the internals export_test.go exposes, so they share the test models
// with spectra and thermo (an in-package test of the core could not import
// them, as they import the core). Other packages' imports are returned
// unchanged.
func coreXTestImports(path string, imports []string) []string {
	if path != "physics" {
		return imports
	}
	return slices.DeleteFunc(slices.Clone(imports), func(imp string) bool {
		r, own := rel(imp)
		return own && r == testModels
	})
}

// engineLayers are the engine's packages from the bottom up: each imports
// only those before it (the leaves among themselves not at all);
// physics/internal/testmodels, the tests' example models, is imported by
// tests only.
var engineLayers = []string{"physics/internal/parallel, physics/eigen, physics/lattice, physics/mesh", "physics", "physics/internal/testmodels", "physics/spectra, physics/fcimport, physics/polar", "physics/thermo", "physics/thermo/qha, physics/transport, physics/fit, physics/scatter"}

// testModels is the test-only package of example models for the tests of
// the packages above the core.
const testModels = "physics/internal/testmodels"

// engineRank is the layer of a module-relative physics path: 1 for the
// leaves (eigen, lattice, mesh, internal/...), 2 for the core, 3 for the
// test models, 4 for spectra, fcimport and polar (the same layer above
// the core), 5 for thermo, 6 for the quasi-harmonic approximation and heat
// transport (thermo/qha, transport: above thermo, neither importing the
// other), fit (above thermo: its tests check its heat capacities against
// thermo's) and scatter (it takes the Debye–Waller factors from thermo's
// displacements), 0 for a path outside physics.
// A package imports only packages of a lower rank (or of its own, for the
// leaves' sub-packages): spectra the core and the leaves, thermo spectra
// too, the leaves nothing of the engine above them.
func engineRank(r string) int {
	switch {
	case r == "physics":
		return 2
	case under(r, testModels):
		return 3
	case under(r, "physics/spectra"), under(r, "physics/fcimport"), under(r, "physics/polar"):
		return 4
	case under(r, "physics/thermo/qha"), under(r, "physics/transport"):
		return 6
	case under(r, "physics/thermo"):
		return 5
	case under(r, "physics/fit"), under(r, "physics/scatter"):
		return 6
	case under(r, "physics"):
		return 1
	}
	return 0
}

// importRule returns why the package at path (in area a) may not import
// imp, or "" when it may.
// goleakPath is the goroutine-leak checker physics tests may use.
const goleakPath = "go.uber.org/goleak"

func importRule(a, path, imp string, test bool) string {
	r, own := rel(imp)
	std := isStd(imp)
	if own && isProgram(r) {
		return "nothing imports a program (a package under cmd/)"
	}
	if test && a != "physics" {
		return ""
	}
	if own && under(r, redisBackend) && path != serverBinary {
		return "only " + serverBinary + " imports the Redis backend"
	}
	if under(imp, redisClient) && path != redisBackend {
		return "only " + redisBackend + " imports the Redis client"
	}
	switch a {
	case "physics":
		if test && imp == goleakPath {
			return "" // tests may check for leaked goroutines
		}
		if !std && !under(imp, gonum) && !(own && under(r, "physics")) {
			return "physics imports only the standard library, gonum and physics/..."
		}
		if own && under(r, testModels) && !test {
			return testModels + " is for tests only"
		}
		if own && engineRank(r) > engineRank(path) && engineRank(path) > 0 {
			return "physics packages import only the packages below them (" + strings.Join(engineLayers, " ← ") + ")"
		}
	case "proto":
		if !std && !under(imp, grpcPath) && !under(imp, protobuf) && !(own && under(r, "proto")) {
			return "proto imports only the standard library, grpc, protobuf and proto/..."
		}
	case "server":
		if own && !under(r, "physics") && !under(r, "proto") && !under(r, "server") {
			return "server imports physics/, proto/ and server/ of this module, never client/"
		}
	case "client library":
		libOK := under(imp, grpcPath) || under(imp, protobuf) || imp == errdetails
		if !std && !libOK && !(own && (under(r, "proto") || area(r) == "client library")) {
			return "the client library imports only the standard library, proto/, grpc, protobuf and errdetails"
		}
	case "cli":
		if own && !under(r, "proto") && !under(r, "server") && !under(r, "physics") && area(r) != "client library" {
			return "the CLI imports the client library, proto/, server/ and physics/ (constants) of this module"
		}
	case "client program":
		if own && !under(r, "proto") && area(r) != "client library" {
			return "a client program imports only the client library and proto/ of this module"
		}
	}
	return ""
}

// depViolations returns what the package at path links but must not: the
// CLI links neither the Redis backend nor the Redis client, through any
// dependency.
func depViolations(path string, deps []string) []string {
	if path != cliPath {
		return nil
	}
	var bad []string
	for _, d := range deps {
		r, own := rel(d)
		if under(d, redisClient) || (own && under(r, redisBackend)) {
			bad = append(bad, fmt.Sprintf("%s links %s: the CLI must not link the shared cache's Redis client", path, d))
		}
	}
	return bad
}

// cliPhysicsViolations checks that the CLI uses physics for constants
// only: every selector X of an imported physics/... package in the CLI's
// non-test files names a constant declared in that package.
func cliPhysicsViolations(t *testing.T, cli pkg, pkgs []pkg) []string {
	t.Helper()
	byPath := map[string]pkg{}
	for _, p := range pkgs {
		byPath[p.ImportPath] = p
	}
	var bad []string
	for _, imp := range cli.Imports {
		r, own := rel(imp)
		if !own || !under(r, "physics") {
			continue
		}
		phys, ok := byPath[imp]
		if !ok {
			bad = append(bad, fmt.Sprintf("%s imports %s, which go list did not report", cliPath, imp))
			continue
		}
		consts := declaredConsts(t, phys)
		used := selectorsOf(t, cli, imp)
		bad = append(bad, nonConstUses(cliPath, imp, used, consts)...)
	}
	return bad
}

// nonConstUses returns a violation for each name in used that is not in
// consts.
func nonConstUses(path, imp string, used []string, consts map[string]bool) []string {
	var bad []string
	for _, name := range used {
		if !consts[name] {
			bad = append(bad, fmt.Sprintf("%s uses %s.%s, which is not a constant: the CLI takes only constants from physics", path, imp, name))
		}
	}
	return bad
}

// declaredConsts returns the names of the top-level constants declared in
// the non-test files of p.
func declaredConsts(t *testing.T, p pkg) map[string]bool {
	t.Helper()
	consts := map[string]bool{}
	for _, f := range parseFiles(t, p) {
		for _, d := range f.Decls {
			gd, ok := d.(*ast.GenDecl)
			if !ok || gd.Tok != token.CONST {
				continue
			}
			for _, s := range gd.Specs {
				for _, n := range s.(*ast.ValueSpec).Names {
					consts[n.Name] = true
				}
			}
		}
	}
	return consts
}

// selectorsOf returns the names X used as pkg.X in the non-test files of p
// for the import path imp (under whatever name each file imports it).
func selectorsOf(t *testing.T, p pkg, imp string) []string {
	t.Helper()
	var names []string
	for _, f := range parseFiles(t, p) {
		local := ""
		for _, is := range f.Imports {
			if path, _ := strconv.Unquote(is.Path.Value); path == imp {
				local = filepath.Base(imp)
				if is.Name != nil {
					local = is.Name.Name
				}
			}
		}
		if local == "" {
			continue
		}
		ast.Inspect(f, func(n ast.Node) bool {
			if sel, ok := n.(*ast.SelectorExpr); ok {
				if id, ok := sel.X.(*ast.Ident); ok && id.Name == local && id.Obj == nil {
					names = append(names, sel.Sel.Name)
				}
			}
			return true
		})
	}
	return names
}

// parseFiles parses the non-test Go files of p.
func parseFiles(t *testing.T, p pkg) []*ast.File {
	t.Helper()
	fset := token.NewFileSet()
	var files []*ast.File
	for _, name := range p.GoFiles {
		f, err := parser.ParseFile(fset, filepath.Join(p.Dir, name), nil, 0)
		if err != nil {
			t.Fatalf("parse %s: %v", name, err)
		}
		files = append(files, f)
	}
	return files
}

// TestRulesCatchViolations feeds the rule functions synthetic import lists:
// each deliberate violation must be reported, and each allowed import must
// not, so that TestImportRules passing means something.
func TestRulesCatchViolations(t *testing.T) {
	m := func(r string) string { return module + "/" + r }
	tests := []struct {
		name    string
		path    string
		imports []string
		test    bool
		want    bool // a violation is expected
	}{
		{name: "physics on std and gonum", path: "physics", imports: []string{"math", gonum + "/mat", m("physics/lattice")}},
		{name: "physics leaf imports the core", path: "physics/mesh", imports: []string{m("physics")}, want: true},
		{name: "physics leaf imports a leaf", path: "physics/lattice", imports: []string{m("physics/eigen")}},
		{name: "physics leaf test imports the core", path: "physics/eigen", imports: []string{m("physics")}, test: true, want: true},
		{name: "spectra on the core and leaves", path: "physics/spectra", imports: []string{m("physics"), m("physics/mesh"), m("physics/internal/parallel")}},
		{name: "thermo on spectra, core and leaves", path: "physics/thermo", imports: []string{m("physics/spectra"), m("physics"), m("physics/mesh")}},
		{name: "fit on thermo, spectra, core and leaves", path: "physics/fit", imports: []string{m("physics/thermo"), m("physics/spectra"), m("physics"), m("physics/eigen"), m("physics/internal/parallel")}},
		{name: "thermo imports fit", path: "physics/thermo", imports: []string{m("physics/fit")}, want: true},
		{name: "core test imports fit", path: "physics", imports: []string{m("physics/fit")}, test: true, want: true},
		{name: "scatter on thermo, spectra, core and leaves", path: "physics/scatter", imports: []string{m("physics/thermo"), m("physics/spectra"), m("physics"), m("physics/internal/parallel")}},
		{name: "thermo imports scatter", path: "physics/thermo", imports: []string{m("physics/scatter")}, want: true},
		{name: "fcimport on the core", path: "physics/fcimport", imports: []string{m("physics"), m("physics/lattice")}},
		{name: "fcimport imports thermo", path: "physics/fcimport", imports: []string{m("physics/thermo")}, want: true},
		{name: "core imports fcimport", path: "physics", imports: []string{m("physics/fcimport")}, want: true},
		{name: "polar on the core and leaves", path: "physics/polar", imports: []string{m("physics"), m("physics/lattice")}},
		{name: "polar test on test models", path: "physics/polar", imports: []string{m("physics/internal/testmodels")}, test: true},
		{name: "polar imports thermo", path: "physics/polar", imports: []string{m("physics/thermo")}, want: true},
		{name: "core imports polar", path: "physics", imports: []string{m("physics/polar")}, want: true},
		{name: "core test imports polar", path: "physics", imports: []string{m("physics/polar")}, test: true, want: true},
		{name: "spectra imports thermo", path: "physics/spectra", imports: []string{m("physics/thermo")}, want: true},
		{name: "spectra test imports thermo", path: "physics/spectra", imports: []string{m("physics/thermo")}, test: true, want: true},
		{name: "core imports spectra", path: "physics", imports: []string{m("physics/spectra")}, want: true},
		{name: "leaf imports thermo", path: "physics/mesh", imports: []string{m("physics/thermo")}, want: true},
		{name: "qha on thermo, spectra, core and leaves", path: "physics/thermo/qha", imports: []string{m("physics/thermo"), m("physics/spectra"), m("physics"), m("physics/internal/parallel")}},
		{name: "transport on thermo, spectra, core and leaves", path: "physics/transport", imports: []string{m("physics/thermo"), m("physics/spectra"), m("physics"), m("physics/mesh")}},
		{name: "thermo imports qha", path: "physics/thermo", imports: []string{m("physics/thermo/qha")}, want: true},
		{name: "thermo test on test models", path: "physics/thermo", imports: []string{m("physics/internal/testmodels")}, test: true},
		{name: "spectra imports test models", path: "physics/spectra", imports: []string{m("physics/internal/testmodels")}, want: true},
		{name: "test models import spectra", path: "physics/internal/testmodels", imports: []string{m("physics/spectra")}, want: true},
		{name: "test models on the core", path: "physics/internal/testmodels", imports: []string{m("physics"), m("physics/mesh")}},
		{name: "physics imports proto", path: "physics", imports: []string{m("proto/modegrid/v1")}, want: true},
		{name: "physics imports server", path: "physics/dos", imports: []string{m("server")}, want: true},
		{name: "physics imports a library", path: "physics", imports: []string{"gonum.org/v1/plot"}, want: true},
		{name: "physics test imports goleak", path: "physics/internal/parallel", imports: []string{goleakPath}, test: true},
		{name: "physics imports goleak", path: "physics", imports: []string{goleakPath}, want: true},
		{name: "physics test imports grpc", path: "physics", imports: []string{grpcPath}, test: true, want: true},
		{name: "physics test on physics", path: "physics", imports: []string{m("physics"), "testing"}, test: true},
		{name: "proto on grpc and protobuf", path: "proto/modegrid/v1", imports: []string{grpcPath + "/codes", protobuf + "/proto"}},
		{name: "proto imports physics", path: "proto/examples", imports: []string{m("physics")}, want: true},
		{name: "server on physics, proto and libraries", path: "server", imports: []string{m("physics"), m("proto/modegrid/v1"), m("server/cache"), "github.com/prometheus/client_golang/prometheus"}},
		{name: "server imports client", path: "server", imports: []string{m("client")}, want: true},
		{name: "server sub-package imports client", path: "server/cache", imports: []string{m("client")}, want: true},
		{name: "server test imports client", path: "server", imports: []string{m("client")}, test: true},
		{name: "server imports the Redis backend", path: "server", imports: []string{m(redisBackend)}, want: true},
		{name: "server binary imports the Redis backend", path: serverBinary, imports: []string{m(redisBackend)}},
		{name: "cache imports the Redis client", path: "server/cache", imports: []string{redisClient + "/v9"}, want: true},
		{name: "Redis backend imports the Redis client", path: redisBackend, imports: []string{redisClient + "/v9"}},
		{name: "client on proto, grpc, protobuf, errdetails", path: "client", imports: []string{m("proto/modegrid/v1"), grpcPath, grpcPath + "/status", protobuf + "/proto", errdetails, "net"}},
		{name: "client imports server", path: "client", imports: []string{m("server")}, want: true},
		{name: "client imports physics", path: "client", imports: []string{m("physics")}, want: true},
		{name: "client imports prometheus", path: "client", imports: []string{"github.com/prometheus/client_golang/prometheus"}, want: true},
		{name: "client imports other genproto", path: "client", imports: []string{"google.golang.org/genproto/googleapis/rpc/status"}, want: true},
		{name: "client test imports server", path: "client", imports: []string{m("server")}, test: true},
		{name: "CLI embeds the server", path: cliPath, imports: []string{m("client"), m("server"), m("physics"), m("proto/examples"), "gonum.org/v1/plot"}},
		{name: "CLI imports the Redis backend", path: cliPath, imports: []string{m(redisBackend)}, want: true},
		{name: "CLI imports the Redis client", path: cliPath, imports: []string{redisClient + "/v9"}, want: true},
		{name: "CLI imports deploy", path: cliPath, imports: []string{m("deploy")}, want: true},
		{name: "load program on the client library", path: "client/cmd/modegrid-load", imports: []string{m("client"), m("proto/examples")}},
		{name: "load program imports server", path: "client/cmd/modegrid-load", imports: []string{m("server")}, want: true},
		{name: "anything imports a program", path: "server", imports: []string{m("client/cmd/modegrid")}, want: true},
		{name: "a test imports a program", path: "deploy", imports: []string{m(serverBinary)}, test: true, want: true},
		{name: "package outside the layout", path: "internal/x", imports: nil, want: true},
		{name: "module root package", path: "", imports: nil, want: true},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got := importViolations(tc.path, tc.imports, tc.test)
			if tc.want && len(got) == 0 {
				t.Errorf("%s importing %v (test %v): no violation reported; want one", tc.path, tc.imports, tc.test)
			}
			if !tc.want && len(got) > 0 {
				t.Errorf("%s importing %v (test %v): %v; want none", tc.path, tc.imports, tc.test, got)
			}
		})
	}
}

// TestDepRuleCatchesRedis: the CLI's transitive dependencies may hold the
// server and Prometheus but neither Redis package.
func TestDepRuleCatchesRedis(t *testing.T) {
	ok := []string{module + "/server", module + "/server/cache", "github.com/prometheus/client_golang/prometheus"}
	if got := depViolations(cliPath, ok); len(got) != 0 {
		t.Errorf("allowed dependencies reported: %v", got)
	}
	for _, d := range []string{redisClient + "/v9", redisClient + "/v9/internal/pool", module + "/" + redisBackend} {
		if got := depViolations(cliPath, append(slices.Clone(ok), d)); len(got) != 1 {
			t.Errorf("CLI linking %s: %d violations; want 1", d, len(got))
		}
	}
	if got := depViolations(serverBinary, []string{redisClient + "/v9"}); len(got) != 0 {
		t.Errorf("the server binary may link Redis: %v", got)
	}
}

// TestConstRuleCatchesNonConst: the CLI may take constants from physics,
// not functions, types or variables.
func TestConstRuleCatchesNonConst(t *testing.T) {
	consts := map[string]bool{"GasConstantJPerMolK": true}
	if got := nonConstUses(cliPath, module+"/physics", []string{"GasConstantJPerMolK"}, consts); len(got) != 0 {
		t.Errorf("a constant reported: %v", got)
	}
	if got := nonConstUses(cliPath, module+"/physics", []string{"GasConstantJPerMolK", "Compile", "Model"}, consts); len(got) != 2 {
		t.Errorf("%d violations for two non-constants; want 2: %v", len(got), got)
	}
}
