#!/usr/bin/env bash
# Golden outputs (tests/golden/README.md): two fixed synthetic nights are
# scored again and the text summary, the JSON result and the mini-epoch audit
# table must equal the files kept in tests/golden/, byte for byte after the
# run time and the tool version are normalised. A difference is shown as a
# unified diff; when it is intended, tests/golden/regenerate rewrites the files
# and the diff goes into the commit for review.
set -u
bin=${REMTONE_BIN:?}
src=${REMTONE_SOURCE:?}
golden=$src/tests/golden
work="${REMTONE_TMP:-/tmp}/golden"
rm -rf "$work" && mkdir -p "$work"
fails=0

if ! "$golden/make-outputs" "$bin" "$work/actual" 2>"$work/err"; then
  echo "FAIL make-outputs:"; sed 's/^/    /' "$work/err"; echo "1 failed"; exit 1
fi

# Every night folder and file on either side, so that a missing or a new file fails too.
files=$(cd "$golden" && find . -mindepth 2 -type f | sort; cd "$work/actual" && find . -mindepth 2 -type f | sort)
for f in $(printf '%s\n' "$files" | sed 's|^\./||' | sort -u); do
  if [ ! -f "$work/actual/$f" ]; then
    echo "FAIL $f: in tests/golden but not made by make-outputs (a night or output gone?)"; fails=$((fails+1))
  elif [ ! -f "$golden/$f" ]; then
    echo "FAIL $f: made by make-outputs but not in tests/golden (a new night or output?)"; fails=$((fails+1))
  elif diff -u --label "tests/golden/$f" --label "now/$f" "$golden/$f" "$work/actual/$f" >"$work/diff" 2>&1; then
    echo "ok   $f"
  else
    echo "FAIL $f differs from the golden file:"
    head -n 80 "$work/diff" | sed 's/^/    /'
    n=$(wc -l <"$work/diff"); [ "$n" -le 80 ] || echo "    ... ($n lines of diff; all of it in $work/diff.$(echo "$f" | tr / _))"
    cp "$work/diff" "$work/diff.$(echo "$f" | tr / _)"
    fails=$((fails+1))
  fi
done

if [ "$fails" != 0 ]; then
  echo "If the change is intended: tests/golden/regenerate [BUILD_DIR], then review and commit the diff."
fi
echo "$fails failed"
[ "$fails" = 0 ]
