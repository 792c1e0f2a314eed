#!/bin/bash
# Out-of-core check (not run by CI): `pare reduce` in memory and with --memory set to a fraction of
# the float32 matrix, on the same file. Prints wall time and peak resident size of both, the
# overhead over the budget, and checks that every output is identical (plan.json up to its command
# line and step timings; report.html, which shows them, is left out).
#
#   benchmarks/bench_memory.sh PATH_TO_PARE [SAMPLESxFEATURES] [FRACTION] [-- extra reduce options]
#
# Defaults: 1000x50000, a quarter of the matrix, `--keep 1000 --components 50` (correlation pruning
# holds its kept set in memory, so an uncapped kept set can exceed a small budget; pare then stops
# and says so). Data are generated once into ${PARE_BENCH_DATA:-/tmp/pare-bench-data}.
set -euo pipefail

pare=$(realpath "${1:?usage: bench_memory.sh PATH_TO_PARE [SAMPLESxFEATURES] [FRACTION] [-- options]}")
size=${2:-1000x50000}
fraction=${3:-0.25}
shift $(( $# < 3 ? $# : 3 ))
[[ ${1:-} == "--" ]] && shift
extra=("$@")
[[ ${#extra[@]} -gt 0 ]] || extra=(--keep 1000 --components 50)

here=$(cd "$(dirname "$0")" && pwd)
py=/usr/bin/python3
n=${size%x*}
p=${size#*x}
data_dir=${PARE_BENCH_DATA:-/tmp/pare-bench-data}
mkdir -p "$data_dir"
data=$data_dir/planted-${n}x${p}.csv
if [[ ! -f $data ]]; then
  echo "generating $data ..."
  "$py" "$here/make_wide_csv.py" --samples "$n" --features "$p" --scenario planted --out "$data.part" >/dev/null
  mv "$data.part" "$data"
fi

matrix=$(( n * p * 4 ))
budget=$("$py" -c "print(int($matrix * $fraction))")
work=$(mktemp -d "${TMPDIR:-/tmp}/pare-bench-memory-XXXXXX")
trap 'rm -rf "$work"' EXIT

run() {  # run NAME ARGS...: prints "seconds peak_kb"
  local name=$1
  shift
  /usr/bin/time -f "%e %M" -o "$work/$name.time" "$pare" reduce "$data" --label group "${extra[@]}" \
    --out "$work/$name" --quiet "$@"
  cat "$work/$name.time"
}

read -r t_mem rss_mem < <(run memory)
read -r t_disk rss_disk < <(run disk --memory "$budget" --cache-dir "$work")

"$py" - "$work/memory" "$work/disk" <<'EOF'
import json, os, sys
a, b = sys.argv[1], sys.argv[2]
def plan(path):
    d = json.load(open(path))
    d.pop("command_line", None)
    for s in d.get("steps", []):
        s.pop("seconds", None)
    return d
bad = []
names = sorted(n for n in os.listdir(a) if n != "report.html")
for name in names:
    x, y = os.path.join(a, name), os.path.join(b, name)
    same = plan(x) == plan(y) if name == "plan.json" else open(x, "rb").read() == open(y, "rb").read()
    if not same:
        bad.append(name)
print("outputs compared: " + ", ".join(names))
if bad:
    print("DIFFERENT: " + ", ".join(bad))
    sys.exit(1)
print("all identical")
EOF

mb() { "$py" -c "print(f'{($1) / 1048576:,.1f} MiB')"; }
echo
echo "data      $data ($n samples x $p features, float32 matrix $(mb "$matrix"))"
echo "options   reduce --label group ${extra[*]}"
printf '%-10s %10s %14s\n' run seconds "peak RSS"
printf '%-10s %10s %14s\n' "in memory" "$t_mem" "$(mb "$rss_mem * 1024")"
printf '%-10s %10s %14s\n' "--memory" "$t_disk" "$(mb "$rss_disk * 1024")"
echo "budget    $(mb "$budget") ($fraction of the matrix); peak RSS over the budget: $(mb "$rss_disk * 1024 - $budget")"
