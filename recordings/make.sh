#!/usr/bin/env bash
# Rebuilds the demo recordings of the invented TM9 frame from the simulated bench.
# Every run is seeded, so the same tool version gives the same files.
# Usage: bash recordings/make.sh   (from the repository root)
set -euo pipefail
cd "$(dirname "$0")/.."
cargo build --release --quiet
bin=target/release/tapmodes
out=recordings
rm -f "$out"/*.wav "$out"/*.json "$out"/*.csv
# variant label | preset | seed | extra analysis options
while read -r label preset seed extra; do
  [ -z "$label" ] && continue
  "$bin" capture --demo "$preset" --seed "$seed" --fast --hits 5 --out "$out" --variant "$label" $extra >/dev/null 2>&1
  "$bin" simulate --preset "$preset" --seed "$seed" --taps 0 --out "$out/.truth-tmp.wav" >/dev/null
  # Keep only the truth (the modes the simulator used); the capture above holds the recording.
  mv "$out/.truth-tmp.truth.json" "$out/$label.truth.json"
  rm -f "$out/.truth-tmp.wav"
  echo "made $out/$label.{wav,json,csv,truth.json}"
done <<'LIST'
arm-solid tm9-arm-solid 101 --mass 41.0
arm-holed tm9-arm-holed 102 --mass 36.5
arm-holed-repeat tm9-arm-holed 106 --mass 36.5
arm-braced tm9-arm-braced 103 --mass 44.0
stack-soft tm9-stack-soft 104 --response-channel 2 --base-channel 1
stack-firm tm9-stack-firm 105 --response-channel 2 --base-channel 1
LIST
du -ch "$out"/*.wav | tail -1
