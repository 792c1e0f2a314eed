#!/bin/bash
# Reading throughput of `pare scan` on a wide CSV, next to pandas.read_csv. Not run by CI.
#
#   benchmarks/bench_read.sh [PATH_TO_PARE]      (default: build-bench/pare beside this folder)
#
# Generates 1,000 x 50,000 (rows=samples, label column) and the same matrix in rows=features
# (labels from a sample sheet), runs `pare scan` once to warm the page cache, then times it with
# --threads 1 and --threads 2 under /usr/bin/time -v (BENCH_REPEAT runs each; the fastest run's
# wall and CPU seconds, the largest peak RSS), times pandas.read_csv on the same files, and checks
# pare's variances against numpy on the values pandas read (1e-5 relative).
# Wall times are only meaningful on an otherwise idle machine: the load average is printed before
# and after, and CPU seconds (user + sys) are shown because they suffer less from other load.
#
# Environment: BENCH_DIR (default /tmp/pare-bench; the two files take ~0.8 GB),
# BENCH_SAMPLES (1000), BENCH_FEATURES (50000), BENCH_REPEAT (3), BENCH_SEED (1),
# BENCH_REGEN=1 to rewrite existing data files, BENCH_GZIP=1 to add gzip-compressed files.
# MB = 10^6 bytes of uncompressed CSV text. Needs /usr/bin/time (Debian package `time`) and
# /usr/bin/python3 with numpy and pandas (python3-numpy, python3-pandas).
# Exits 1 when a check fails, 2 when something it needs is missing.
set -euo pipefail

here=$(cd "$(dirname "$0")" && pwd)
pare=${1:-$here/../build-bench/pare}
py=/usr/bin/python3
dir=${BENCH_DIR:-/tmp/pare-bench}
n=${BENCH_SAMPLES:-1000}
p=${BENCH_FEATURES:-50000}
repeat=${BENCH_REPEAT:-3}
seed=${BENCH_SEED:-1}

die() { echo "bench_read.sh: $*" >&2; exit 2; }
[ -x /usr/bin/time ] || die "needs /usr/bin/time (apt-get install -y time)"
[ -x "$pare" ] || die "no pare binary at $pare"
"$py" -c 'import numpy, pandas' 2>/dev/null || die "$py lacks numpy/pandas (python3-pandas)"
mkdir -p "$dir"

base="$dir/wide-${n}x${p}-seed${seed}"
sheet="$base-samples.csv"
matrix_bytes=$((n * p * 4))

generate() {  # generate FILE LAYOUT [generator options]
  local file=$1 layout=$2
  shift 2
  if [ -s "$file" ] && [ "${BENCH_REGEN:-0}" != 1 ]; then return; fi
  "$py" "$here/make_wide_csv.py" --samples "$n" --features "$p" --seed "$seed" \
    --layout "$layout" --out "$file" --sheet "$sheet" "$@"
}

generate "$base-rows=samples.csv" rows=samples
generate "$base-rows=features.csv" rows=features --label-column ''
files=("$base-rows=samples.csv" "$base-rows=features.csv")
if [ "${BENCH_GZIP:-0}" = 1 ]; then
  generate "$base-rows=samples.csv.gz" rows=samples --gzip
  generate "$base-rows=features.csv.gz" rows=features --label-column '' --gzip
  files+=("$base-rows=samples.csv.gz" "$base-rows=features.csv.gz")
fi

text_bytes() {  # uncompressed size of FILE
  case $1 in
    *.gz) gzip -dc "$1" | wc -c ;;
    *) stat -c %s "$1" ;;
  esac
}

# seconds from /usr/bin/time's "h:mm:ss" or "m:ss.ss"
to_seconds() {
  awk -F: '{ s = 0; for (i = 1; i <= NF; i++) s = s * 60 + $i; printf "%.3f", s }' <<<"$1"
}

results="$dir/results.tsv"
pandas_results="$dir/pandas-results.tsv"
printf 'file\tlayout\tthreads\ttext_MB\twall_s\tMB_per_s\tcpu_s\tread_s\tread_MB_per_s' >"$results"
printf '\tpeak_RSS_MB\tRSS_over_matrix\n' >>"$results"
printf 'file\ttext_MB\tpandas_read_s\tpandas_MB_per_s\tpandas_peak_RSS_MB' >"$pandas_results"
printf '\tratio_vs_pare_t1\tratio_vs_pare_t2\n' >>"$pandas_results"
load_before=$(cut -d' ' -f1-3 /proc/loadavg)
checks_failed=0

for file in "${files[@]}"; do
  name=$(basename "$file")
  case $name in
    *rows=samples*) layout=rows=samples label=(--label group) pandas_label=group ;;
    *) layout=rows=features label=(--labels "$sheet:group") pandas_label='' ;;
  esac
  bytes=$(text_bytes "$file")
  "$pare" scan "$file" --layout "$layout" "${label[@]}" --threads 2 --quiet \
    --out "$dir/out-warm"  # warms the page cache
  declare -A wall_of=()
  for threads in 1 2; do
    out="$dir/out-$name-t$threads"
    best_wall="" best_cpu="" best_read="" rss_max=0
    for ((r = 0; r < repeat; r++)); do
      /usr/bin/time -v -o "$dir/time.txt" "$pare" scan "$file" --layout "$layout" "${label[@]}" \
        --threads "$threads" --out "$out" >"$dir/stdout.txt"
      wall=$(to_seconds "$(awk -F': ' '/Elapsed \(wall clock\)/ { print $2 }' "$dir/time.txt")")
      rss=$(awk -F': ' '/Maximum resident set size/ { print $2 }' "$dir/time.txt")
      cpu=$(awk -F': ' '/User time|System time/ { s += $2 } END { printf "%.2f", s }' \
        "$dir/time.txt")
      read_s=$(sed -n 's/.*read in \([0-9.]*\) s).*/\1/p' "$dir/stdout.txt")
      if [ -z "$best_wall" ] || awk -v a="$wall" -v b="$best_wall" 'BEGIN { exit !(a < b) }'; then
        best_wall=$wall best_cpu=$cpu best_read=$read_s
      fi
      if ((rss > rss_max)); then rss_max=$rss; fi
    done
    wall_of[$threads]=$best_wall
    awk -v f="$name" -v l="$layout" -v t="$threads" -v b="$bytes" -v w="$best_wall" \
      -v c="$best_cpu" -v rd="$best_read" -v rss="$rss_max" -v m="$matrix_bytes" 'BEGIN {
        printf "%s\t%s\t%d\t%.1f\t%.2f\t%.1f\t%.2f\t%.2f\t%.1f\t%.1f\t%.2f\n", f, l, t, b / 1e6,
          w, b / 1e6 / w, c, rd, (rd > 0 ? b / 1e6 / rd : 0), rss * 1024 / 1e6, rss * 1024 / m
      }' >>"$results"
  done

  # Results must not depend on --threads (the program's promise).
  if cmp -s "$dir/out-$name-t1/profile.tsv" "$dir/out-$name-t2/profile.tsv"; then
    echo "PASS $name: profile.tsv identical with --threads 1 and 2"
  else
    echo "FAIL $name: profile.tsv differs between --threads 1 and 2"
    checks_failed=1
  fi

  # pandas on the same (warm) file; it also checks pare's statistics against numpy on the values
  # pandas read.
  if ! "$py" "$here/pandas_read.py" "$file" --layout "$layout" --label-column "$pandas_label" \
    --profile "$dir/out-$name-t1/profile.tsv" --tol 1e-5 >"$dir/pandas.txt"; then
    checks_failed=1
  fi
  grep -E '^(PASS|FAIL)' "$dir/pandas.txt" | sed "s|^\([A-Z]*\) |\1 $name: pare |"
  awk -v f="$name" -v b="$bytes" -v w1="${wall_of[1]}" -v w2="${wall_of[2]}" '
    $1 == "pandas_read_seconds" { s = $2 }
    $1 == "pandas_peak_rss_kb" { kb = $2 }
    END { printf "%s\t%.1f\t%.2f\t%.1f\t%.1f\t%.1f\t%.1f\n", f, b / 1e6, s, b / 1e6 / s,
            kb * 1024 / 1e6, s / w1, s / w2 }' "$dir/pandas.txt" >>"$pandas_results"
done

echo
echo "pare scan, ${n} x ${p}; MB = 10^6 bytes of CSV text; matrix = n*p*4 bytes" \
  "= $((matrix_bytes / 1000000)) MB"
echo "wall, cpu (user + sys) = whole run, fastest of $repeat; read = pare's own read time"
echo "load average before: $load_before; after: $(cut -d' ' -f1-3 /proc/loadavg);" \
  "$(nproc) cores"
column -t -s $'\t' "$results"
echo
echo "pandas $("$py" -c 'import pandas; print(pandas.__version__)') read_csv on the same files" \
  "(ratio = pandas read seconds / pare scan wall seconds)"
column -t -s $'\t' "$pandas_results"
exit "$checks_failed"
