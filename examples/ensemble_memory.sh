#!/usr/bin/env bash
# Peak memory and time of `planisphere ensemble` for two binaries side by side in one run
# (e.g. the build before and after a change), each run twice, interleaved, under /usr/bin/time -v.
#
#   bash examples/ensemble_memory.sh BEFORE_BINARY AFTER_BINARY MAP.fits MASK.fits [MEMBERS] [THREADS]
#
# The ensemble is MEMBERS (default 6) links to MAP.fits, measured with --mask MASK.fits -J 4 on
# THREADS (default 2) rayon threads; the two merged tables are compared byte for byte. The maps
# of `examples/measure_memory.rs` (its `inputs` step) serve, e.g. NSIDE 1024:
#   cargo run --release --example measure_memory -- inputs --nside 1024 --inputs /tmp/mm
# Prints one table row per run: binary, peak RSS (MiB), wall (s), CPU user + sys (s), and the
# map size, so that the peak can be read in maps held.
set -euo pipefail
before=$1 after=$2 map=$3 mask=$4 members=${5:-6} threads=${6:-2}
work=$(mktemp -d /tmp/ensemble_memory.XXXXXX)
trap 'rm -rf "$work"' EXIT
mkdir "$work/maps"
for i in $(seq 1 "$members"); do ln -s "$(readlink -f "$map")" "$work/maps/member_$i.fits"; done
map_mib=$(du -Lm "$map" | cut -f1)
echo "ensemble of $members links to $(basename "$map") ($map_mib MiB), --mask $(basename "$mask") -J 4, RAYON_NUM_THREADS=$threads"
echo "| binary | peak RSS | wall | CPU | peak in maps |"
echo "|---|---|---|---|---|"
run() {
  local name=$1 bin=$2 out=$3
  rm -rf "$out"
  RAYON_NUM_THREADS=$threads /usr/bin/time -v "$bin" ensemble --maps "$work/maps/member_*.fits" \
    --mask "$mask" -J 4 --quiet --output-dir "$out" > /dev/null 2> "$work/time.txt"
  local rss wall user sys
  rss=$(awk -F': ' '/Maximum resident/ {print $2}' "$work/time.txt")
  wall=$(awk -F': ' '/Elapsed \(wall/ {print $2}' "$work/time.txt")
  user=$(awk -F': ' '/User time/ {print $2}' "$work/time.txt")
  sys=$(awk -F': ' '/System time/ {print $2}' "$work/time.txt")
  awk -v n="$name" -v r="$rss" -v w="$wall" -v u="$user" -v s="$sys" -v m="$map_mib" 'BEGIN {
    split(w, t, ":"); secs = (length(t) == 3) ? t[1] * 3600 + t[2] * 60 + t[3] : t[1] * 60 + t[2];
    printf "| %s | %.1f MiB | %.1f s | %.1f s | %.2f |\n", n, r / 1024, secs, u + s, r / 1024 / m }'
}
for round in 1 2; do
  run before "$before" "$work/out_before"
  run after "$after" "$work/out_after"
done
table() { find "$1" -maxdepth 1 -type f \( -name '*.csv' -o -name '*.npy' \) | sort | xargs cat | sha256sum | cut -c1-16; }
if [ "$(table "$work/out_before")" = "$(table "$work/out_after")" ]; then
  echo "merged tables: equal"
else
  echo "merged tables: DIFFER"
fi
