#!/usr/bin/env bash
# End-to-end replay benchmark: generates a 10-million-row CSV (once) and
# times `lifeledger replay` on it, reporting rows per second and peak RSS.
# Usage: tests/bench/replay.sh [ROWS]   (default 10000000)
set -euo pipefail
cd "$(dirname "$0")/../.."
rows=${1:-10000000}
dir=target/bench-replay
if [ ! -f "$dir/bench.csv" ] || [ "$(cat "$dir/rows" 2>/dev/null)" != "$rows" ]; then
  python3 tests/bench/replay_rows.py "$dir" "$rows" > "$dir.rows.tmp"
  mv "$dir.rows.tmp" "$dir/rows.actual"; echo "$rows" > "$dir/rows"
fi
[ -n "${NO_BUILD:-}" ] || cargo build --release -q
actual=$(cat "$dir/rows.actual")
for i in 1 2 3; do
  start=$(date +%s.%N)
  /usr/bin/time -f "%M" -o "$dir/rss" target/release/lifeledger replay --config "$dir/bench.toml" --input "$dir/bench.csv" --no-progress > "$dir/out.txt"
  end=$(date +%s.%N)
  python3 -c "import sys; r=$actual; s=$end-$start; print(f'run $i: {r} rows in {s:.2f} s = {r/s/1e6:.2f} M rows/s, peak RSS {int(open(\"$dir/rss\").read())/1024:.1f} MiB')"
done
