#!/bin/sh
# make demo: the most complete path that exists so far, on bundled data.
# Teaches a model from the bundled example point sets (an invented flange
# gasket, 30 good parts) and prints its summary.
set -eu
build=${1:-build}
bin="$build/inspect/modeband"
out="$build/demo"
mkdir -p "$out"
echo "== modeband demo: teach a part model from 30 example point sets =="
"$bin" teach --points tests/data/points --out "$out/fg3140.model.json" \
    --source "FG-3140 example point sets (invented demo part)"
echo
echo "== the saved model, read back and checked =="
"$bin" model-info "$out/fg3140.model.json"
echo
echo "model file: $out/fg3140.model.json"
