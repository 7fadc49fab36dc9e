#!/usr/bin/env bash
# Whole-process benchmark: `fanmark figure` against the Python baseline on the same job — a
# 4000 × 1000 long-format CSV map, dR_xx/dn in the (n, B) frame from the geometric lever arm
# of 285 nm SiO₂ (ε_r = 3.9), V_CNP from the low-field R_xx peak, 200 constant-ν lines
# (ν = p/q, q ≤ 5, |ν| ≤ 10) each offered a label, 178 mm × 120 mm PNG at 300 dpi.
# Runs alternate (baseline, fanmark) so a noisy shared machine hits both alike; prints each
# run, the medians, the ratio and the peak resident memory (from /usr/bin/time -v).
#
# usage: app/benches/figure_vs_python.sh [RUNS] [CSV]
set -euo pipefail
RUNS=${1:-5}
CSV=${2:-/tmp/bench-data/m4000x1000.csv}
BENCH=/work/shared/bench
ROOT=$(cd "$(dirname "$0")/../.." && pwd)
BIN=$ROOT/target/release/fanmark
OUT=$(mktemp -d)
if [ ! -f "$CSV" ]; then
  mkdir -p "$(dirname "$CSV")"
  python3 "$BENCH/gen_map.py" 4000 1000 "$CSV"
fi
[ -x "$BIN" ] || (cd "$ROOT" && cargo build --release -p fanmark)

run() { # name, command…
  local name=$1; shift
  /usr/bin/time -v -o "$OUT/$name.time" "$@" >"$OUT/$name.log" 2>&1
  local wall rss
  wall=$(awk -F': ' '/Elapsed \(wall clock\)/ {print $2}' "$OUT/$name.time")
  rss=$(awk -F': ' '/Maximum resident set size/ {print $2}' "$OUT/$name.time")
  # h:mm:ss or m:ss.ss → seconds
  echo "$wall $rss" | awk '{n=split($1,a,":"); s=0; for(i=1;i<=n;i++) s=s*60+a[i]; printf "%.3f %d\n", s, $2}'
}

py=(); rs=(); pymem=(); rsmem=()
for i in $(seq 1 "$RUNS"); do
  read -r t m < <(run "py$i" python3 "$BENCH/baseline_pipeline.py" "$CSV" "$OUT/py.png")
  py+=("$t"); pymem+=("$m")
  read -r t m < <(run "rs$i" "$BIN" figure "$CSV" -o "$OUT/fanmark.png" \
      --channel drxx_dn --frame density --gate-dielectric 285e-9,3.9 \
      --lines filling --q-max 5 --nu-max 10 --label-max 200 \
      --width-mm 178 --height-mm 120 --dpi 300)
  rs+=("$t"); rsmem+=("$m")
  echo "run $i: python ${py[-1]} s (${pymem[-1]} kB)   fanmark ${rs[-1]} s (${rsmem[-1]} kB)"
done
median() { printf '%s\n' "$@" | sort -g | awk '{a[NR]=$1} END {print (NR%2 ? a[(NR+1)/2] : (a[NR/2]+a[NR/2+1])/2)}'; }
mp=$(median "${py[@]}"); mr=$(median "${rs[@]}")
echo "median wall time: python $mp s, fanmark $mr s, ratio $(awk -v a="$mp" -v b="$mr" 'BEGIN{printf "%.1f", a/b}')×"
echo "median peak RSS:  python $(median "${pymem[@]}") kB, fanmark $(median "${rsmem[@]}") kB"
tail -1 "$OUT/rs1.log"
echo "outputs in $OUT"
