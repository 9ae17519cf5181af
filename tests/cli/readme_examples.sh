#!/usr/bin/env bash
# Runs the README's own command examples as written (issue 18): every line of a ``` block that
# starts with "dropfit " (with its "\" continuation lines) and names no placeholder, in a scratch
# folder where demo_clips/ is the source tree's, each expected to end with exit status 0.
# Left out, and said so: the synopsis lines (placeholders in capitals or [options]), `./dev`
# (installs packages), and `dropfit render` (renders full-size clips for minutes). `dropfit run`
# on the six demo clips takes ~25 s on 2 cores.
# Usage: readme_examples.sh DROPFIT_BINARY SOURCE_DIR
set -u
tool=$1
src=$2
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
ln -s "$src/demo_clips" "$work/demo_clips"
# The examples, one per line, continuation lines joined.
awk '
  /^```/ { inb = !inb; next }
  !inb { next }
  cont { line = line " " $0; sub(/[ ]*\\$/, "", line); if ($0 !~ /\\$/) { print line; cont = 0 }; next }
  /^dropfit / { line = $0; if ($0 ~ /\\$/) { sub(/[ ]*\\$/, "", line); cont = 1 } else print line }
' "$src/README.md" >"$work/examples.txt"
ran=0
failed=0
while IFS= read -r example; do
  if [[ "$example" =~ \[|[A-Z]{3,}|\.\.\. ]]; then
    echo "skip (synopsis): $example"
    continue
  fi
  case "$example" in
  "dropfit render "*)
    echo "skip (renders full-size clips for minutes): $example"
    continue
    ;;
  esac
  echo "run: $example"
  (cd "$work" && eval "\"$tool\" ${example#dropfit }") >"$work/last.log" 2>&1
  status=$?
  ran=$((ran + 1))
  if [ "$status" -ne 0 ]; then
    echo "FAILED with exit status $status:"
    cat "$work/last.log"
    failed=$((failed + 1))
  fi
done <"$work/examples.txt"
echo "$ran examples run, $failed failed"
[ "$ran" -ge 3 ] || { echo "expected at least the calibrate, track and analyze examples"; exit 1; }
[ "$failed" -eq 0 ]
