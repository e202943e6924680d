#!/usr/bin/env bash
# Rebuilds the demo model from its seed, end to end: scenario data and
# tokenizer (Go), training (PyTorch, offline), export into suites/demo/model,
# then the quality measurements the model card reports.
#
#   bash suites/demo/train/build.sh          # about 140 minutes on 2 cores (training: about 131)
#
# Needs python3-torch, python3-numpy and, for speed, libopenblas0-pthread
# (Debian packages). Same seed, torch build and thread count: same weights.
set -euo pipefail
cd "$(dirname "$0")/../../.."
work=${WORK:-$(mktemp -d)}
echo "workspace: $work" >&2

go run ./suites/demo/mkdata --seed 1 --vocab 2048 --drills 30000 --out "$work"

# One run in five phases of a curriculum (one resumable --state; only the
# drill share and the learning rate change between phases): text and drills
# half and half, drills alone until the copying heads form (they did between
# steps 3250 and 3750), text again with 30% drills, a lower rate, then 10%
# drills at a middle rate while parcel sums come back. The last phase writes
# its last step's weights (--select last): by then validation loss no longer
# tracks few-shot accuracy (see the model card).
train() { # train STEPS DRILL_SHARE LR [MORE train.py ARGUMENTS]
  LD_LIBRARY_PATH=/usr/lib/x86_64-linux-gnu/openblas-pthread /usr/bin/python3 suites/demo/train/train.py \
    --train "$work/train.u16" --valid "$work/valid.u16" --vocab 2048 --out "$work/model" \
    --layers 6 --hidden 128 --heads 4 --ffn 512 --seq 256 --batch 12 --steps "$1" \
    --lr "$3" --warmup 150 --schedule constant --act-l1 0.05 --embed-std 0.1 \
    --prev-head 2.5 --prev-head-pos-amp 0.5 --prev-head-lags 1,2 \
    --drill "$work/drill.u16" --drill-mix-start "$2" --drill-mix-end "$2" \
    --dev "$work/dev.json" --dev-items 40 --eval-every 250 --eval-windows 32 \
    --seed 1 --threads 2 --state "$work/state.pt" --log "$work/train.log" "${@:4}"
}
train 1500 0.5 1e-3
train 3750 1.0 1e-3
train 4750 0.3 1e-3
train 5250 0.3 2.5e-4
train 7500 0.1 5e-4 --select last

for f in config.json model.safetensors tokenizer.json tokenizer_config.json train_log.json; do
  cp "$work/model/$f" suites/demo/model/
done
go test ./suites/demo -run 'TestQuality|TestMatchesPyTorch' -count=1 -v
