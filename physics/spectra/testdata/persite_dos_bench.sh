#!/usr/bin/env bash
# The per-site DOS at first-principles size, end to end: modegrid's CLI
# (embedded server) against the numpy reference (persite_dos_numpy.py), on
# one and two cores, with wall time and peak memory (maxrss) from
# /usr/bin/time -v. Prints a Markdown table (DEVELOPERS.md, "Measured: at
# first-principles size").
#
#   physics/spectra/testdata/persite_dos_bench.sh              # the pure-Go build
#   TAGS=lapack physics/spectra/testdata/persite_dos_bench.sh  # another build of the CLI
#   MODEGRID=/path/to/modegrid ... .sh                         # a given binary (e.g. an older one)
#   RUNS="64:12" CORES="1" ... .sh                             # a subset
#
# A job that the CLI's embedded server refuses by its work bound (its
# estimate at 1 GFlop/s per core over the command's 30-minute deadline) runs
# through a modegridd on the same cores with the bound raised, the CLI
# calling it (--server); the row says so and its maxrss is the server's.
#
# Run from the repository root. Needs go, /usr/bin/time and a python3 with
# numpy (PYTHON, default /usr/bin/python3). The models are written by
# TestWritePerSiteModels into OUT (default a temporary directory), with the
# CSV outputs; nothing is written into the repository.
set -euo pipefail

TAGS=${TAGS:-}
PYTHON=${PYTHON:-/usr/bin/python3}
RUNS=${RUNS:-"64:12 128:8"}
CORES=${CORES:-"1 2"}
OUT=${OUT:-$(mktemp -d)}
here=$(cd "$(dirname "$0")" && pwd)
# The job's DOS window, bin and width (THz), as in persite_bench_test.go.
DOSARGS=(--min 0 --max 15 --step 0.03)
WIDTH=0.15

mkdir -p "$OUT"
go test -count=1 ./physics/spectra -run TestWritePerSiteModels -args -persite.write "$OUT" >/dev/null
if [ -z "${MODEGRID:-}" ]; then
	MODEGRID="$OUT/modegrid"
	go build ${TAGS:+-tags "$TAGS"} -o "$MODEGRID" ./client/cmd/modegrid
fi
if [ -z "${MODEGRIDD:-}" ]; then
	MODEGRIDD="$OUT/modegridd"
	go build ${TAGS:+-tags "$TAGS"} -o "$MODEGRIDD" ./server/cmd/modegridd
fi

# timed CMD...: runs CMD under /usr/bin/time -v, prints "wall_s cpu_s
# maxrss_MiB" (cpu: user + system, which a loaded machine inflates less
# than the wall time).
timed() {
	local log="$OUT/time.log"
	/usr/bin/time -v "$@" >"$OUT/stdout.log" 2>"$log" || return 1
	local wall cpu rss
	wall=$(awk -F': ' '/Elapsed \(wall clock\)/ {n=split($2, t, ":"); s=0; for (i=1; i<=n; i++) s=s*60+t[i]; print s}' "$log")
	cpu=$(awk -F': ' '/User time|System time/ {s+=$2} END {printf "%.2f", s}' "$log")
	rss=$(awk -F': ' '/Maximum resident set size/ {printf "%.0f", $2/1024}' "$log")
	echo "$wall $cpu $rss"
}

echo "load average before: $(cut -d' ' -f1-3 /proc/loadavg); build: ${TAGS:-pure Go}; CLI: $MODEGRID"
echo
echo "| crystal | grid | diagonalised | cores | modegrid CLI: wall (cpu), maxrss | numpy: wall (cpu), maxrss | numpy / modegrid, wall | agreement |"
echo "|---|---|---|---|---|---|---|---|"
# viaServer CORES ARGS...: the CLI with ARGS against a modegridd on CORES
# cores with the work bound raised; prints "wall_s cpu_s maxrss_MiB" (wall
# of the CLI, cpu and maxrss of the server).
viaServer() {
	local c=$1
	shift
	local port=$((20000 + RANDOM % 20000))
	GOMAXPROCS="$c" /usr/bin/time -v "$MODEGRIDD" --listen "127.0.0.1:$port" --metrics-listen off \
		--max-compute-seconds 36000 --log-level warn 2>"$OUT/server.log" &
	local pid=$!
	local ok=
	for _ in $(seq 200); do
		if (echo >"/dev/tcp/127.0.0.1/$port") 2>/dev/null; then ok=1; break; fi
		sleep 0.1
	done
	[ -n "$ok" ] || { echo "modegridd did not start" >&2; kill "$pid"; return 1; }
	local wall
	read -r wall _ _ < <(timed "$MODEGRID" "$1" --server "127.0.0.1:$port" "${@:2}") || { cat "$OUT/time.log" >&2; return 1; }
	kill -TERM $(pgrep -P "$pid") 2>/dev/null || true
	wait "$pid" || true
	local cpu rss
	cpu=$(awk -F': ' '/User time|System time/ {s+=$2} END {printf "%.2f", s}' "$OUT/server.log")
	rss=$(awk -F': ' '/Maximum resident set size/ {printf "%.0f", $2/1024}' "$OUT/server.log")
	echo "$wall $cpu $rss"
}

for run in $RUNS; do
	sites=${run%%:*}
	n=${run##*:}
	model="$OUT/persite-$sites.json"
	diag=$(( (n * n * n + 8) / 2 ))
	for c in $CORES; do
		ours="$OUT/ours-$sites-$n-$c.csv"
		args=(dos --model "$model" --grid "$n" --method gaussian --width "$WIDTH" "${DOSARGS[@]}" --per-site --format csv --out "$ours")
		via=
		if ! read -r w1 c1 r1 < <(timed env GOMAXPROCS="$c" "$MODEGRID" "${args[@]}"); then
			grep -q max-compute-seconds "$OUT/time.log" || { cat "$OUT/time.log" >&2; exit 1; }
			read -r w1 c1 r1 < <(viaServer "$c" "${args[@]}")
			via=" (via modegridd: the embedded server's work bound refused it)"
		fi
		read -r w2 c2 r2 < <(timed env OPENBLAS_NUM_THREADS="$c" OMP_NUM_THREADS="$c" "$PYTHON" "$here/persite_dos_numpy.py" "$model" \
			--grid "$n" --method gaussian --width "$WIDTH" "${DOSARGS[@]}" --compare "$ours") || { cat "$OUT/time.log" >&2; exit 1; }
		agree=$(grep -o 'L1 [0-9.e+-]*' "$OUT/stdout.log" || true)
		ratio=$(awk -v a="$w1" -v b="$w2" 'BEGIN {printf "%.2f", b/a}')
		echo "| $sites sites | ${n}³ | $diag | $c | ${w1} s (${c1} s), ${r1} MiB$via | ${w2} s (${c2} s), ${r2} MiB | $ratio | Gaussian $agree |"
	done
done
echo
echo "load average after: $(cut -d' ' -f1-3 /proc/loadavg)"
# The two compute the same thing: the histogram DOS of each crystal on a
# 4³ grid agrees to rounding.
for run in $RUNS; do
	sites=${run%%:*}
	"$MODEGRID" dos --model "$OUT/persite-$sites.json" --grid 4 --method histogram "${DOSARGS[@]}" --per-site --format csv --out "$OUT/check-$sites.csv"
	OPENBLAS_NUM_THREADS=1 "$PYTHON" "$here/persite_dos_numpy.py" "$OUT/persite-$sites.json" --grid 4 --method histogram "${DOSARGS[@]}" \
		--compare "$OUT/check-$sites.csv" | sed -n 2p | sed "s|^|$sites sites, histogram on 4³, |"
done
