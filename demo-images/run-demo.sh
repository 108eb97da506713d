#!/usr/bin/env bash
# Runs the demo recipes on the demo images: one file at a time, then the
# whole folder as a batch (proof copies of every image, with a JSON report).
#
#   demo-images/run-demo.sh [OUTPUT-FOLDER]     (default: demo-output/)
#
# The output folder is taken relative to the current directory and created if
# needed; existing outputs are replaced. The images themselves are made by
# `cargo run --release --example make_demo -- demo-images`.
set -euo pipefail

here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
out="${1:-demo-output}"
mkdir -p "$out"
out="$(cd "$out" && pwd)"
# Inputs are named relative to the demo folder.
cd "$here"

pumice() {
    cargo run --release --quiet --manifest-path "$here/../Cargo.toml" -- "$@"
}

demo() {
    local input="$1" recipe="$2" output="$3"
    pumice run "$input" -o "$out/$output" -r "recipes/$recipe" --overwrite
    echo "$input -> $out/$output (recipes/$recipe)"
}

demo diatom-slide.tif micrograph.toml diatom-slide-clean.tif
demo ledger-page.png ledger.toml ledger-page-clean.png
demo harbour-photo.jpg photo.toml harbour-web.jpg
demo order-form-scan.png scan-cleanup.toml order-form-clean.png

pumice run . -o "$out/proofs/" -r recipes/proofs.toml --overwrite --report "$out/proofs/report.json"
echo "demo-images/ -> $out/proofs/ (recipes/proofs.toml, report in $out/proofs/report.json)"
