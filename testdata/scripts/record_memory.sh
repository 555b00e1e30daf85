#!/usr/bin/env bash
# Measures the resident memory of "tilebench record" writing at least
# 200,000 frames of the drive game (default frame size) with the scripted
# expert, using GNU time's maximum resident set size. The bar
# (docs/recording.md) is 300 MB. Needs about 6 GB of free disk in the
# temporary folder; removes the dataset afterwards.
#   bash testdata/scripts/record_memory.sh [FRAMES]
set -euo pipefail
cd "$(dirname "$0")/../.."
frames=${1:-200000}
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
go build -o "$tmp/tilebench" ./cmd/tilebench
# Expert episodes of drive last about 650 steps; ask for enough of them,
# then count the rows actually written.
episodes=$(( frames / 600 + 1 ))
/usr/bin/time -v "$tmp/tilebench" record --game drive --episodes "$episodes" --out "$tmp/rec" \
  >"$tmp/out.txt" 2>"$tmp/time.txt"
rows=$(grep -o '"rows": [0-9]*' "$tmp/rec/manifest.json" | tail -1 | grep -o '[0-9]*')
kb=$(grep 'Maximum resident set size' "$tmp/time.txt" | grep -o '[0-9]*')
secs=$(grep 'Elapsed (wall clock)' "$tmp/time.txt" | awk '{print $NF}')
bytes=$(du -sb "$tmp/rec" | cut -f1)
echo "rows $rows, dataset $((bytes / 1000000)) MB, max resident $((kb / 1024)) MiB, wall $secs"
if [ "$rows" -lt "$frames" ]; then echo "fewer rows than $frames"; exit 1; fi
if [ "$kb" -gt $((300 * 1000)) ]; then echo "over 300 MB resident"; exit 1; fi
