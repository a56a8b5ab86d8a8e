#!/usr/bin/env bash
# check-html.sh renders the demo HTML reports (rank of the traces and the
# profiles, and the diff of the traces) with headless Chromium from the
# Debian packages: a screenshot at phone width (390 px) and PDFs on A4 and
# Letter paper, for a person to look at. It is not run in CI.
#
#   bash testdata/check-html.sh [OUTDIR]     # default: a new temporary directory
#
# Installs chromium with apt-get when it is missing (Debian; needs root).
set -euo pipefail
cd "$(dirname "$0")/.."
out=${1:-$(mktemp -d)}
mkdir -p "$out"
command -v chromium >/dev/null || (apt-get update && apt-get install -y chromium)

go run ./cmd/culprit demo --traces --format html -o "$out/rank-traces.html" --domains testdata/greenhouse.domains.json
go run ./cmd/culprit demo --format html -o "$out/rank-profiles.html"
go run ./cmd/culprit demo --write "$out/demo" 2>/dev/null
go run ./cmd/culprit diff --format html -o "$out/diff-traces.html" \
	"$out/demo/greenhouse-v41.traces.jsonl.gz" "$out/demo/greenhouse-v42.traces.jsonl.gz" || true # exit 3 is a verdict

shoot() { # shoot ARGS... : one headless Chromium run with a fresh profile
	local profile
	profile=$(mktemp -d)
	chromium --headless --no-sandbox --disable-gpu --disable-background-networking --disable-component-update \
		--disable-sync --no-first-run --user-data-dir="$profile" "$@" 2>/dev/null
	rm -rf "$profile"
}
for page in rank-traces rank-profiles diff-traces; do
	shoot --screenshot="$out/$page.390.png" --window-size=390,2400 "file://$out/$page.html"
	# A4 and Letter: Chromium takes the paper size from the page's @page
	# rule, so each PDF gets a copy of the page with that rule added.
	for paper in A4 Letter; do
		sed "s|</style>|@page { size: $paper; margin: 12mm; }</style>|" "$out/$page.html" >"$out/$page.$paper.html"
		shoot --no-pdf-header-footer --print-to-pdf="$out/$page.$paper.pdf" "file://$out/$page.$paper.html"
	done
done
ls -l "$out"
echo "look at $out/*.png and the PDFs (pdftoppm -png turns a PDF into page images)"
