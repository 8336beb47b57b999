#!/bin/sh
# Moves a few of a fuzz run's new inputs into the committed seed corpus:
# only inputs of at most MAX_BYTES, only those that add coverage over the
# seeds (libFuzzer -merge=1), and of those the smallest MAX_FILES, so seed
# corpora stay at tens of small files.
#   keep-small.sh <fuzzer> <seed-dir> <work-corpus> <scratch-dir> <max-bytes> <max-files>
set -eu
fuzzer=$1 seeds=$2 work=$3 scratch=$4 maxb=$5 maxf=$6
rm -rf "$scratch"
mkdir -p "$scratch/small" "$scratch/merged"
find "$work" -type f -size -"$((maxb + 1))"c -exec cp {} "$scratch/small/" \;
cp "$seeds"/* "$scratch/merged/" 2>/dev/null || true
"$fuzzer" -merge=1 -max_len="$maxb" "$scratch/merged" "$scratch/small" > "$scratch/merge.log" 2>&1 || true
kept=0
for f in $(ls -Sr "$scratch/merged"); do
	[ "$kept" -lt "$maxf" ] || break
	[ -e "$seeds/$f" ] && continue
	cp "$scratch/merged/$f" "$seeds/$f"
	kept=$((kept + 1))
done
echo "$kept new inputs kept in $seeds ($(ls "$seeds" | wc -l) files)"
