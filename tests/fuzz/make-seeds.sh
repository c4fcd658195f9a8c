#!/bin/sh
# Rebuild the seed corpora of tests/fuzz/corpus from the project's sample
# and test inputs, so that the fuzzers start from files that reach every
# part of each reader (good files and each kind of refused one). Files
# named hand-* are written by hand and kept. Run after adding test inputs:
#
#   tests/fuzz/make-seeds.sh && git add tests/fuzz/corpus
set -eu
here=$(cd "$(dirname "$0")" && pwd)
top=$(cd "$here/../.." && pwd)
corpus=$here/corpus
for r in model campaign pair; do
  mkdir -p "$corpus/$r"
  find "$corpus/$r" -type f ! -name 'hand-*' -exec rm -f {} +
done
mkdir -p "$corpus/base"

# model files: the samples, the refused models, the reference model
for f in "$top"/samples/*.ini "$top"/tests/bad-models/*.ini "$top"/tests/fixtures/*.ini; do
  [ -f "$f" ] || continue
  d=$(basename "$(dirname "$f")")
  cp "$f" "$corpus/model/$d-$(basename "$f")"
done

# one-file campaigns (the joints and points files too: the reader must
# refuse them cleanly)
for f in "$top"/samples/*.csv "$top"/tests/bad-campaigns/*.csv "$top"/tests/data/*.csv \
         "$top"/tests/data/*.tsv; do
  [ -f "$f" ] || continue
  d=$(basename "$(dirname "$f")")
  cp "$f" "$corpus/campaign/$d-$(basename "$f")"
done

# URDF (corpus/urdf) is not rebuilt here: its seeds are the samples as
# `twistfit export --as urdf` wrote them (export-*), the URDF fixtures of
# the tests (fixtures-*, case-*) and hand-written ones (hand-*).

# two-file campaigns: joints file, a line %%, points file (fuzz_pair.c)
pair() {
  name=$1
  { cat "$2"; printf '%%%%\n'; cat "$3"; } > "$corpus/pair/$name"
}
pair samples-demo "$top/samples/demo-joints.csv" "$top/samples/demo-points.csv"
pair data-campaign "$top/tests/data/campaign-joints.csv" "$top/tests/data/campaign-points.csv"
pair data-missed "$top/tests/data/campaign-joints-missed.csv" "$top/tests/data/campaign-points-missed.csv"
bad=$top/tests/bad-campaigns
grep -v '^#' "$bad/expect.tsv" | cut -f1 | grep '+' | sort -u | while IFS= read -r c; do
  j=${c%%+*}
  p=${c#*+}
  pair "bad-$(basename "$j" .csv)+$(basename "$p" .csv)" "$bad/$j" "$bad/$p"
done
echo "seeds: $(for r in model base campaign pair; do printf '%s %s  ' "$r" "$(ls "$corpus/$r" | wc -l)"; done)"
