#!/usr/bin/env bash
# Trains the reference policies in testdata/policies: the set-attention
# and position-aware attention families on both games at three patch sizes
# each (drive: 4, 8, 16; paddle: 5, 10, 20), by behaviour cloning with
# DAgger from the games' scripted experts, on training seeds only, then
# scores each on 50 held-out episodes (recorded in the file). Every
# policy centres its token sets (--centre, the default of tilebench train;
# see docs/families.md): on paddle, whose static field fills most tokens,
# the set families do not learn without it.
#
# Every run is limited by --iters (so the same commands give the same
# bytes on the same machine) and capped by --budget (5m on 2 workers; 10m
# on drive, 25m for the drive run of 30 rounds, 12m on paddle); if the budget ends a run
# first, its .json summary says "stopped": "budget".
#
# usage: testdata/policies/train.sh [game ...]     (default: drive paddle)
#        testdata/policies/train.sh table          (the docs/training.md table,
#                                                  from the recorded summaries)
set -euo pipefail
cd "$(dirname "$0")/../.."
out=testdata/policies

if [ "${1:-}" = table ]; then
  echo "| policy | iterations | training time | held-out IQM | held-out mean | expert IQM | expert mean | IQM / expert IQM | mean / expert mean |"
  echo "|---|---|---|---|---|---|---|---|---|"
  for f in "$out"/*.json; do
    [ -s "$f" ] || continue
    /usr/bin/python3 - "$f" <<'PY'
import json, os, sys
d = json.load(open(sys.argv[1]))
name = os.path.basename(sys.argv[1])[:-5]
print("| %s | %d (%s) | %.0f s | %.1f | %.1f | %.1f | %.1f | %.0f%% | %.1f%% |" % (
    name, d["iters"], d["stopped"], d["elapsed_s"], d["heldout_iqm"], d["heldout_score"],
    d["expert_iqm"], d["expert_score"], 100 * d["heldout_iqm"] / d["expert_iqm"],
    100 * d["heldout_score"] / d["expert_score"]))
PY
  done
  exit 0
fi
bin=$(mktemp -d)/tilebench
ckpt=$(mktemp -d)
go build -o "$bin" ./cmd/tilebench

# Hyper-parameters shared by every reference policy (see docs/training.md).
common=(--method clone --centre --seed 1 --workers 2 --budget 5m --heldout 50 --patience -1 --epochs 4 --batch 32 --episodes-per-round 4)
drive=(--iters 20 --budget 10m)
# paddle's own budget: on the two shared cores of the reference machine
# (shared with other training) 5 minutes ended some runs before their
# iterations.
paddle=(--iters 16 --budget 12m)
# References that needed more rounds than the rest to reach their target
# (docs/training.md); these flags come last and win. On paddle the
# students at the smaller patches start to learn later: in development,
# 16 rounds gave the set-attention student 71% of the expert at patch 5
# and 89% at patch 10. The set-attention student at patch 5 is also larger,
# with a hidden layer in its keys, fits 8 epochs a round at half the
# learning rate and is chosen on 16 validation episodes: 90.7% against
# 80.1% with the shared settings (docs/training.md); it took 70 minutes
# on two busy cores, its best round (18) at 36.
declare -A more=([drive-posattention-p4]="--episodes-per-round 6 --budget 9m" [drive-posattention-p16]="--iters 30 --budget 25m"
  [paddle-attention-p5]="--iters 26 --value-size 32 --hidden 64 --key-hidden 48 --epochs 8 --val-episodes 16 --lr 1.5e-3 --budget 75m" [paddle-posattention-p5]="--iters 26"
  [paddle-attention-p10]="--iters 20" [paddle-posattention-p10]="--iters 20")

games=("$@")
[ ${#games[@]} -eq 0 ] && games=(drive paddle)
for game in "${games[@]}"; do
  case $game in
    drive)  sizes=(4 8 16); hp=("${drive[@]}") ;;
    paddle) sizes=(5 10 20); hp=("${paddle[@]}") ;;
    *) echo "unknown game $game" >&2; exit 2 ;;
  esac
  for family in attention posattention; do
    for p in "${sizes[@]}"; do
      name=$game-$family-p$p
      echo "== $name" >&2
      extra=()
      [ -n "${more[$name]:-}" ] && read -r -a extra <<< "${more[$name]}"
      "$bin" train --game "$game" --family "$family" --patch "$p" "${common[@]}" "${hp[@]}" "${extra[@]}" \
        --checkpoint "$ckpt/$name.ckpt" --out "$out/$name.safetensors" --json | tail -n 1 > "$out/$name.json"
    done
  done
done
rm -rf "$ckpt" "$(dirname "$bin")"
