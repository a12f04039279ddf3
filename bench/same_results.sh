#!/usr/bin/env bash
# Do two builds of tapmodes give the same results? For work that must leave results
# bit-identical (speed work, moving code): analyse the demo recordings (the arms also with
# the demo drive, the stacks with their base channel) and every independent recording (with
# the channel roles of the accuracy table) with both binaries, then compare the mode lists
# (JSON without its creation time), the curve CSVs and the printed output.
#
#   cargo build --release && cp target/release/tapmodes /tmp/tapmodes-before
#   ... change the code ...
#   cargo build --release && bash bench/same_results.sh /tmp/tapmodes-before target/release/tapmodes
#
# Prints "identical" and exits 0, or lists what differs and exits 1.
set -u
if [ $# -ne 2 ]; then
  echo "usage: bash bench/same_results.sh OLD_BINARY NEW_BINARY" >&2
  exit 2
fi
old=$(readlink -f "$1")
new=$(readlink -f "$2")
for b in "$old" "$new"; do
  [ -x "$b" ] || { echo "not an executable: $b" >&2; exit 2; }
done
repo=$(cd "$(dirname "$0")/.." && pwd)
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
rec="$repo/recordings"
ind="$repo/tests/independent"

cases() {
  for f in arm-braced arm-holed arm-holed-repeat arm-solid; do
    echo "$f|$rec/$f.wav"
    echo "$f-drive|$rec/$f.wav --drive $rec/tm9.drive"
  done
  echo "stack-soft|$rec/stack-soft.wav --base-channel 2"
  echo "stack-firm|$rec/stack-firm.wav --base-channel 2"
  for f in strip-cantilever-mems-3k2 timoshenko-strip-44k1-mono tm9-frame-48k-s1 \
    tm9-frame-48k-s2 tm9-frame-mems-3k2 tube-cantilever-48k-mono tube-cantilever-48k-stereo; do
    echo "$f|$ind/$f.wav"
  done
  echo "tm9-frame-48k-s1-noforce|$ind/tm9-frame-48k-s1.wav --no-force"
  echo "tm9-stack-8k-3ch|$ind/tm9-stack-8k-3ch.wav --force-channel 0 --base-channel 1 --response-channel 2"
  echo "tm9-stack-mems-3k2|$ind/tm9-stack-mems-3k2.wav --base-channel 0 --response-channel 1 --no-force"
}

for side in old new; do
  bin=${!side}
  mkdir -p "$work/$side"
  cases | while IFS='|' read -r name args; do
    # shellcheck disable=SC2086 # the arguments are meant to split
    "$bin" analyze $args --quiet -o "$work/$side/$name.json" >"$work/$side/$name.txt" 2>&1
    echo "exit $?" >>"$work/$side/$name.txt"
  done
  sed -i '/"created_utc"/d' "$work/$side"/*.json
  sed -i "s|$work/$side|OUT|g" "$work/$side"/*.txt
done

if diff -r "$work/old" "$work/new" >"$work/diff.txt"; then
  echo "identical: $(cases | wc -l) analyses (mode lists, curve CSVs, printed output)"
  exit 0
fi
echo "the builds differ (the first 40 lines of the differences):"
sed 's|'"$work"'/||g' "$work/diff.txt" | head -n 40
exit 1
