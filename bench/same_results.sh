#!/usr/bin/env bash
# Usage: bench/same_results.sh BEFORE AFTER
# Builds the demo documents (experiments/*.md) and the benchmark's A, B and S
# documents (bench/data, written by compare.py) with two stet binaries, each
# with --no-cache in a fresh copy, and diffs their --json with every `seconds`
# removed. Issue 19's rule: a faster engine gives the same results, bit for bit.
set -euo pipefail
before=$(realpath "$1"); after=$(realpath "$2")
root=$(cd "$(dirname "$0")/.." && pwd)
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
summaries() {
    # Both binaries build copies at the same path, which the summaries name.
    local bin=$1 out=$2 copy=$work/copy
    rm -rf "$copy"
    mkdir -p "$copy/experiments" "$copy/demo-data" "$copy/bench" "$out"
    cp "$root"/experiments/*.md "$copy/experiments/"
    cp "$root"/demo-data/*.csv "$copy/demo-data/"
    cp "$root"/bench/data/{A,B,S}.md "$root"/bench/data/{A,B}.csv "$copy/bench/"
    for doc in "$copy"/experiments/*.md "$copy"/bench/*.md; do
        # The copies' data lies beside, not under, the experiments folder.
        "$bin" build "$doc" --no-cache --allow-outside --json "$doc.json" -o "$doc.html" \
            >/dev/null 2>"$doc.err" || { echo "$bin failed on $doc:"; cat "$doc.err"; exit 2; }
        python3 - "$doc.json" > "$doc.stripped" <<'PY'
import json, sys
def strip(v):
    if isinstance(v, dict):
        return {k: strip(x) for k, x in v.items() if k != "seconds"}
    if isinstance(v, list):
        return [strip(x) for x in v]
    return v
print(json.dumps(strip(json.load(open(sys.argv[1]))), indent=1, sort_keys=True))
PY
        mv "$doc.stripped" "$out/$(basename "$doc" .md).json"
    done
}
summaries "$before" "$work/before"
summaries "$after" "$work/after"
status=0
for stripped in "$work"/before/*.json; do
    name=$(basename "$stripped")
    if cmp -s "$stripped" "$work/after/$name"; then
        echo "same: ${name%.json} ($(wc -c < "$stripped") bytes)"
    else
        echo "DIFFERENT: ${name%.json}"
        diff "$stripped" "$work/after/$name" | head -20
        status=1
    fi
done
exit $status
