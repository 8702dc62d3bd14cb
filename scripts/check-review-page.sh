#!/bin/sh
# Opens a batch's review page in headless Chromium and fails when it does not travel:
#   scripts/check-review-page.sh OUTPUT_FOLDER
# The folder (a `chromasift batch --review-page` output) is first copied elsewhere, so
# any absolute link would break. Fails on a reference to another site, a script error or
# any console error, a file that cannot be loaded, or a picture that is not shown (the
# page writes `data-pictures="found/all"` on its body once loaded).
# Needs chromium (Debian: apt-get install -y chromium). CHROMIUM overrides the command.
set -eu
dir=${1:?usage: check-review-page.sh OUTPUT_FOLDER}
browser=${CHROMIUM:-chromium}
command -v "$browser" >/dev/null 2>&1 || { echo "check-review-page: $browser not found" >&2; exit 3; }
[ -f "$dir/review.html" ] || { echo "check-review-page: $dir/review.html not found" >&2; exit 2; }

work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
cp -R "$dir" "$work/moved"
page="$work/moved/review.html"

if grep -Eq '(src|href)="(https?:|//|file:|/)' "$page"; then
  echo "check-review-page: the page links outside its folder:" >&2
  grep -Eo '(src|href)="(https?:|//|file:|/)[^"]*"' "$page" | head -5 >&2
  exit 1
fi

# A profile of its own, so the run neither reads nor leaves anything in the user's.
"$browser" --headless --no-sandbox --disable-gpu --no-first-run --user-data-dir="$work/profile" \
  --enable-logging=stderr --v=0 --virtual-time-budget=10000 \
  --dump-dom "file://$page" >"$work/dom.html" 2>"$work/log.txt" || {
  echo "check-review-page: chromium failed:" >&2; tail -5 "$work/log.txt" >&2; exit 1; }

status=0
if grep -E 'CONSOLE|Uncaught|ERR_FILE_NOT_FOUND|net::ERR' "$work/log.txt" >"$work/bad.txt"; then
  echo "check-review-page: console messages or failed loads:" >&2
  cat "$work/bad.txt" >&2
  status=1
fi
pictures=$(grep -Eo 'data-pictures="[0-9]+/[0-9]+"' "$work/dom.html" | head -1 | sed 's/.*="\(.*\)"/\1/')
if [ -z "$pictures" ]; then
  echo "check-review-page: the page's script did not run to the end (no data-pictures)" >&2
  status=1
else
  found=${pictures%/*}
  all=${pictures#*/}
  if [ "$found" != "$all" ] || [ "$all" = 0 ]; then
    echo "check-review-page: $found of $all pictures shown" >&2
    status=1
  else
    echo "check-review-page: page loads from a moved copy; all $all pictures shown; no console errors"
  fi
fi
exit $status
