#!/usr/bin/env bash
# ngspice next to nocoil on the benchmark network (benches/network.rs),
# on the same decks and frequency grids, process start excluded:
#
# - sweep: ngspice -b on a 1,000-point and on a 2-point `.ac` of the
#   exported deck; (t_1000 - t_2) / 998 is its cost per point.
# - Monte Carlo: one ngspice process runs a `.control` loop that alters
#   every top-level resistor and capacitor by up to 1 % (sunif) and runs
#   the 201-point `.ac` per trial; (t_MANY - t_FEW) / (MANY - FEW) is its
#   cost per trial.
# - noise: ngspice -b on a 1,000-point and a 2-point `.noise` of the same
#   network (the op-amps carrying the default input noise as elements,
#   see `nocoil::export::spice::noise_deck`); (t_1000 - t_2) / 998 per
#   point against the criterion bench `noise` (nocoil's output_noise on
#   the same grid, set-up included), which also times the step response
#   to 0.01 % settling.
# - nocoil: the criterion benches `sweep`, `sweep_cli`, `montecarlo` and `noise`
#   (run here unless SKIP_CARGO_BENCH=1, then their last results are read).
# - command line: `nocoil sweep examples/vibration-antialias.toml
#   --points N` (its default band, 300 Hz to 44 kHz) for N = CLI_POINTS
#   and N = 2, standard output to /dev/null, (t_N - t_2) / (N - 2) per
#   point: the design, the solvers' set-up and process start cancel, the
#   sweep and the CSV printing remain. On rayon's default two threads
#   (the machine's cores) and on one (RAYON_NUM_THREADS=1). ngspice runs
#   the active deck that `nocoil design` writes for that demo on the same
#   band at the same density (`.ac dec D 300 44k`, D chosen for about
#   CLI_POINTS points; ngspice's count, read from its log, divides its
#   time) and on two points. The runs of this row are interleaved (see
#   cli_times).
#
# Every ngspice and command-line timing is the best of RUNS runs (default
# 7), and every criterion timing the fastest of its samples: the machine
# is shared, and the minimum is the least disturbed on both sides.
#
# Usage: bash benches/ngspice_side_by_side.sh   (from the repository root)
set -euo pipefail

RUNS=${RUNS:-7}
MANY=${MANY:-100}
FEW=${FEW:-10}
CLI_POINTS=${CLI_POINTS:-100000}
DIR=$(mktemp -d)
trap 'rm -rf "$DIR"' EXIT

command -v ngspice >/dev/null || {
    echo "ngspice is needed: apt-get install ngspice" >&2
    exit 1
}

cargo run --quiet --release --example export_bench_deck -- "$DIR" >/dev/null
cargo build --quiet --release
NOCOIL=target/release/nocoil
DEMO=examples/vibration-antialias.toml
"$NOCOIL" design "$DEMO" --out "$DIR/demo" >/dev/null

# The deck without its `.end`, then a control block, then `.end`.
with_control() {
    sed '$d' "$1"
    printf '.control\n%s\n.endc\n.end\n' "$2"
}

# Best wall time of $RUNS runs of ngspice -b on deck $1, in seconds. The
# output must show the expected number of data rows ($2) at least once,
# so a deck that fails cannot pass for a fast one.
best_time() {
    local deck=$1 rows=$2 best= start end t log
    log="$DIR/log"
    for _ in $(seq "$RUNS"); do
        start=$(date +%s.%N)
        # ngspice -b exits 1 after a control block even when it ran.
        ngspice -b "$deck" >"$log" 2>&1 || true
        end=$(date +%s.%N)
        grep -q "No. of Data Rows : $rows\$" "$log" || {
            echo "ngspice did not run $deck as expected:" >&2
            cat "$log" >&2
            exit 1
        }
        t=$(echo "$end - $start" | bc -l)
        if [ -z "$best" ] || [ "$(echo "$t < $best" | bc -l)" = 1 ]; then best=$t; fi
    done
    echo "$best"
}

# The command-line row, interleaved: each of RUNS rounds runs, one after
# the other, nocoil sweep for CLI_POINTS and 2 points on two threads and
# on one (RAYON_NUM_THREADS=1), printing to /dev/null (what the output's
# destination costs is not the command's), and ngspice on the two
# command-line decks; each keeps its fastest time, so a change of the
# machine's load between runs falls on both sides alike. A first run of
# each must show its row count. Prints the six times, seconds.
cli_times() {
    python3 - "$NOCOIL" "$DEMO" "$CLI_POINTS" "$DIR" "$cli_rows" "$RUNS" <<'PY'
import os, subprocess, sys, time
nocoil, demo, points, folder, rows, runs = sys.argv[1:]
points, rows, runs = int(points), int(rows), int(runs)
def nocoil_run(n, threads):
    env = dict(os.environ, RAYON_NUM_THREADS=str(threads))
    return [nocoil, "sweep", demo, "--points", str(n)], env
cases = [
    (*nocoil_run(points, 2), points + 1),
    (*nocoil_run(2, 2), 3),
    (*nocoil_run(points, 1), points + 1),
    (*nocoil_run(2, 1), 3),
    (["ngspice", "-b", f"{folder}/cli_many.cir"], None, f"No. of Data Rows : {rows}"),
    (["ngspice", "-b", f"{folder}/cli_two.cir"], None, "No. of Data Rows : 2"),
]
for cmd, env, expect in cases:
    out = subprocess.run(cmd, env=env, capture_output=True, text=True)
    ok = (out.stdout.count("\n") == expect) if isinstance(expect, int) else (expect in out.stdout + out.stderr)
    if not ok:
        sys.exit(f"{' '.join(cmd)} did not run as expected")
best = [float("inf")] * len(cases)
for _ in range(runs):
    for k, (cmd, env, _) in enumerate(cases):
        start = time.perf_counter()
        subprocess.run(cmd, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        best[k] = min(best[k], time.perf_counter() - start)
print(" ".join(f"{t:.6f}" for t in best))
PY
}

# Sweep decks: the deck's own `.ac` line, run once.
with_control "$DIR/sweep_1000.cir" run >"$DIR/s1000.cir"
with_control "$DIR/sweep_2.cir" run >"$DIR/s2.cir"

# Noise decks: the deck's own `.noise` line, run once.
with_control "$DIR/noise_1000.cir" run >"$DIR/n1000.cir"
with_control "$DIR/noise_2.cir" run >"$DIR/n2.cir"

# Monte Carlo decks: every top-level R and C (not those inside the op-amp
# subcircuits) altered within 1 % of its nominal value, one `.ac` per trial.
alters=$(awk '
    /^\.subckt/ { inside = 1 }
    /^\.ends/ { inside = 0; next }
    !inside && /^[RrCc]/ { printf "  alter %s = %s*(1+0.01*sunif(0))\n", $1, $4 }
' "$DIR/montecarlo.cir")
mc_deck() {
    with_control "$DIR/montecarlo.cir" "set rndseed=4
repeat $1
$alters
  run
  destroy all
end"
}
mc_deck "$MANY" >"$DIR/mc_many.cir"
mc_deck "$FEW" >"$DIR/mc_few.cir"
parts=$(echo "$alters" | grep -c alter)

# Command-line decks: the demo's active deck with its `.ac` line replaced.
# The command's default band is the demo's edges (3 kHz, 4.4 kHz) a decade
# apart on either side, as the deck's own `.ac` line has it; D points per
# decade over its log10(44000 / 300) = 2.166 decades.
ac_line=$(grep -n '^\.ac dec [0-9]* 300 44k$' "$DIR/demo/active.cir" | cut -d: -f1)
[ -n "$ac_line" ] || { echo "the demo's active deck does not sweep 300 Hz to 44 kHz" >&2; exit 1; }
per_decade=$(echo "($CLI_POINTS - 1) / (l(44000 / 300) / l(10))" | bc -l | xargs printf '%.0f')
cli_deck() {
    # The deck's `.print` line is dropped: ngspice times the sweep alone.
    sed -e "${ac_line}s/.*/$1/" -e '/^\.print /d' "$DIR/demo/active.cir" >"$DIR/cli_$2.tmp"
    with_control "$DIR/cli_$2.tmp" run >"$DIR/cli_$2.cir"
}
cli_deck ".ac dec $per_decade 300 44k" many
cli_deck ".ac dec 1 300 3000" two
# ngspice's own count of the many-point grid.
ngspice -b "$DIR/cli_many.cir" >"$DIR/cli_many.log" 2>&1 || true
cli_rows=$(sed -n 's/.*No. of Data Rows : \([0-9]*\)$/\1/p' "$DIR/cli_many.log" | head -1)
[ -n "$cli_rows" ] || { echo "ngspice did not run the demo deck:" >&2; cat "$DIR/cli_many.log" >&2; exit 1; }

t1000=$(best_time "$DIR/s1000.cir" 1000)
t2=$(best_time "$DIR/s2.cir" 2)
tmany=$(best_time "$DIR/mc_many.cir" 201)
tfew=$(best_time "$DIR/mc_few.cir" 201)
ng_point_us=$(echo "($t1000 - $t2) / 998 * 1000000" | bc -l)
read -r t_cli_many t_cli_two t_cli1_many t_cli1_two t_ng_cli_many t_ng_cli_two <<<"$(cli_times)"
[ -n "$t_ng_cli_two" ] || { echo "the command-line timing failed" >&2; exit 1; }
ng_cli_point_us=$(echo "($t_ng_cli_many - $t_ng_cli_two) / ($cli_rows - 2) * 1000000" | bc -l)
cli_point_us=$(echo "($t_cli_many - $t_cli_two) / ($CLI_POINTS - 2) * 1000000" | bc -l)
cli1_point_us=$(echo "($t_cli1_many - $t_cli1_two) / ($CLI_POINTS - 2) * 1000000" | bc -l)
ng_trial_us=$(echo "($tmany - $tfew) / ($MANY - $FEW) * 1000000" | bc -l)
tn1000=$(best_time "$DIR/n1000.cir" 1000)
tn2=$(best_time "$DIR/n2.cir" 2)
ng_noise_point_us=$(echo "($tn1000 - $tn2) / 998 * 1000000" | bc -l)

if [ "${SKIP_CARGO_BENCH:-0}" != 1 ]; then
    cargo bench --quiet --bench sweep >&2
    cargo bench --quiet --bench sweep_cli >&2
    cargo bench --quiet --bench montecarlo >&2
    cargo bench --quiet --bench noise >&2
fi

# Fastest sample of a criterion bench: time per iteration, nanoseconds.
criterion_ns() {
    python3 -c 'import json, sys
d = json.load(open(sys.argv[1]))
print(min(t / i for t, i in zip(d["times"], d["iters"])))' \
        "target/criterion/$1/new/sample.json"
}
sparse_point_us=$(echo "$(criterion_ns sweep_1000/sparse) / 1000 / 1000" | bc -l)
dense_point_us=$(echo "$(criterion_ns sweep_1000/dense) / 1000 / 1000" | bc -l)
table_point_us=$(echo "($(criterion_ns sweep_cli/table_20000) - $(criterion_ns sweep_cli/table_2)) / 19998 / 1000" | bc -l)
sparse_trial_us=$(echo "$(criterion_ns montecarlo_201/loop_sparse_10000_trials) / 10000 / 1000" | bc -l)
dense_trial_us=$(echo "$(criterion_ns montecarlo_201/loop_dense_100_trials) / 100 / 1000" | bc -l)
noise_point_us=$(echo "($(criterion_ns noise/noise_1000) - $(criterion_ns noise/noise_2)) / 998 / 1000" | bc -l)
step_ms=$(echo "$(criterion_ns step_to_0.01_percent) / 1000000" | bc -l)
engine1_s=$(echo "$(criterion_ns montecarlo_201/engine_1_threads_10000_trials) / 1000000000" | bc -l)
engine2_s=$(echo "$(criterion_ns montecarlo_201/engine_2_threads_10000_trials) / 1000000000" | bc -l)

printf 'ngspice: 1000 points %.4f s, 2 points %.4f s; Monte Carlo %d trials %.4f s, %d trials %.4f s (%d parts altered)\n' \
    "$t1000" "$t2" "$MANY" "$tmany" "$FEW" "$tfew" "$parts"
printf '\n%-28s %12s %12s %12s\n' "per frequency point (us)" nocoil-sparse nocoil-dense ngspice
printf '%-28s %12.3f %12.3f %12.3f\n' "" "$sparse_point_us" "$dense_point_us" "$ng_point_us"
printf '%-28s %12.1f %12.1f\n' "ngspice / nocoil" \
    "$(echo "$ng_point_us / $sparse_point_us" | bc -l)" "$(echo "$ng_point_us / $dense_point_us" | bc -l)"
printf '\n%-28s %12s %12s %12s %12s\n' "command line, per point (us)" cli-2-threads cli-1-thread table ngspice
printf '%-28s %12.3f %12.3f %12.3f %12.3f\n' "" "$cli_point_us" "$cli1_point_us" "$table_point_us" "$ng_cli_point_us"
printf '%-28s %12.1f %12.1f %12.1f\n' "ngspice / nocoil" \
    "$(echo "$ng_cli_point_us / $cli_point_us" | bc -l)" "$(echo "$ng_cli_point_us / $cli1_point_us" | bc -l)" \
    "$(echo "$ng_cli_point_us / $table_point_us" | bc -l)"
printf '(nocoil sweep, 2 threads: %d points %.4f s, 2 points %.4f s; 1 thread: %.4f s, %.4f s;\n ngspice: %d points %.4f s, 2 points %.4f s)\n' \
    "$CLI_POINTS" "$t_cli_many" "$t_cli_two" "$t_cli1_many" "$t_cli1_two" "$cli_rows" "$t_ng_cli_many" "$t_ng_cli_two"
printf '\n%-28s %12s %12s %12s\n' "per 201-point trial (us)" nocoil-sparse nocoil-dense ngspice
printf '%-28s %12.2f %12.1f %12.1f\n' "" "$sparse_trial_us" "$dense_trial_us" "$ng_trial_us"
printf '%-28s %12.1f %12.1f\n' "ngspice / nocoil" \
    "$(echo "$ng_trial_us / $sparse_trial_us" | bc -l)" "$(echo "$ng_trial_us / $dense_trial_us" | bc -l)"
printf '\n%-36s %8.3f s\n' "10,000 trials, bare sparse loop" "$(echo "$sparse_trial_us * 10000 / 1000000" | bc -l)"
printf '%-36s %8.3f s\n' "10,000 trials, monte_carlo, 1 thread" "$engine1_s"
printf '%-36s %8.3f s\n' "10,000 trials, monte_carlo, 2 threads" "$engine2_s"
printf '%-36s %8.3f s\n' "10,000 trials, ngspice (estimated)" "$(echo "$ng_trial_us * 10000 / 1000000" | bc -l)"
printf '\n%-28s %12s %12s\n' "noise, per point (us)" nocoil ngspice
printf '%-28s %12.3f %12.3f\n' "" "$noise_point_us" "$ng_noise_point_us"
printf '%-28s %12.1f\n' "ngspice / nocoil" "$(echo "$ng_noise_point_us / $noise_point_us" | bc -l)"
printf '(ngspice .noise: 1000 points %.4f s, 2 points %.4f s)\n' "$tn1000" "$tn2"
printf '\n%-36s %8.3f ms\n' "step response to 0.01 %, nocoil" "$step_ms"
