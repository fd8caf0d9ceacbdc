#!/usr/bin/env bash
# Renders the cover and the summary page of the demo pack to PNG for the README (docs/pack-cover.png,
# docs/pack-summary.png). Needs poppler-utils (pdftoppm, pdftotext). Run from anywhere: ./scripts/readme-images.sh
set -euo pipefail
cd "$(dirname "$0")/.."
export CARGO_TARGET_DIR="${CARGO_TARGET_DIR:-$HOME/.cache/tailpack-target}"

out="$(mktemp -d)"
trap 'rm -rf "$out"' EXIT
pack="$(cargo run --quiet -- run config-demo/fund.yaml --out "$out" --quiet | tail -n 1)"
pdf="$pack/pack.pdf"

# The summary is the page whose text starts its first section; find it rather than assume a page number.
pages="$(pdfinfo "$pdf" 2>/dev/null | awk '/^Pages:/ {print $2}')"
summary=""
for ((p = 2; p <= pages; p++)); do
  if pdftotext -f "$p" -l "$p" -layout "$pdf" - | grep -E '^\s*1\s+Summary\s*$' >/dev/null; then summary="$p"; break; fi
done
[ -n "$summary" ] || { echo "no summary page found in $pdf" >&2; exit 1; }

render() { # page, target
  pdftoppm -png -r 80 -f "$1" -l "$1" -singlefile "$pdf" "${2%.png}"
}
render 1 docs/pack-cover.png
render "$summary" docs/pack-summary.png
echo "wrote docs/pack-cover.png (page 1) and docs/pack-summary.png (page $summary of $pages)"
