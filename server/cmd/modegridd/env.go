package main

import (
	"flag"
	"fmt"
	"os"
	"sort"
	"strings"
)

// environ is the process environment; a variable so tests can replace it.
var environ = os.Environ

// otherPrograms are MODEGRID_* variables read by the project's other
// programs, which share a shell with modegridd on a developer's machine:
// the modegrid CLI's bearer token and the test suite's switches. They are
// not modegridd's settings, and not refused.
var otherPrograms = map[string]bool{"MODEGRID_TOKEN": true, "MODEGRID_BENCH_LARGE": true, "MODEGRID_TEST_PLOT_DIR": true}

// envOnly are modegridd's settings read only from the environment.
var envOnly = []string{redisPasswordEnv}

// unknownEnv refuses MODEGRID_* variables that name no flag of fs: a
// misspelt setting would otherwise be ignored without a word. The known
// names are derived from the flags themselves, so a new flag is known at
// once. Every unknown variable is reported, with the closest known name
// (edit distance) when one is close, and the list of known names.
func unknownEnv(fs *flag.FlagSet, env []string) error {
	known := map[string]bool{}
	var names []string
	fs.VisitAll(func(f *flag.Flag) {
		if f.Name != "version" {
			known[envName(f.Name)] = true
			names = append(names, envName(f.Name))
		}
	})
	// Settings read only from the environment (no flag: a secret must not
	// show in the process list).
	for _, k := range envOnly {
		known[k] = true
		names = append(names, k)
	}
	sort.Strings(names)
	var bad []string
	for _, kv := range env {
		k, _, _ := strings.Cut(kv, "=")
		if !strings.HasPrefix(k, "MODEGRID_") || known[k] || otherPrograms[k] {
			continue
		}
		msg := k
		if near, d := closest(k, names); d <= max(2, len(k)/4) {
			msg += fmt.Sprintf(" (did you mean %s?)", near)
		}
		bad = append(bad, msg)
	}
	if len(bad) == 0 {
		return nil
	}
	sort.Strings(bad)
	return fmt.Errorf("unknown environment variable %s; known: %s", strings.Join(bad, ", "), strings.Join(names, " "))
}

// closest is the name of names nearest to s in edit distance, and that
// distance.
func closest(s string, names []string) (string, int) {
	best, bestD := "", -1
	for _, n := range names {
		if d := editDistance(s, n); bestD < 0 || d < bestD {
			best, bestD = n, d
		}
	}
	return best, bestD
}

// editDistance is the Levenshtein distance between a and b (insertions,
// deletions and substitutions of bytes; the names are ASCII).
func editDistance(a, b string) int {
	prev := make([]int, len(b)+1)
	cur := make([]int, len(b)+1)
	for j := range prev {
		prev[j] = j
	}
	for i := 1; i <= len(a); i++ {
		cur[0] = i
		for j := 1; j <= len(b); j++ {
			sub := prev[j-1]
			if a[i-1] != b[j-1] {
				sub++
			}
			cur[j] = min(sub, prev[j]+1, cur[j-1]+1)
		}
		prev, cur = cur, prev
	}
	return prev[len(b)]
}
