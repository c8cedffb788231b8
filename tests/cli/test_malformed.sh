#!/usr/bin/env bash
# The malformed-input corpus (tests/malformed/expected.tsv): every case must end
# (60 s at most), exit with the code README.md documents for its fault, name the
# fault on standard error, and print nothing on standard output when it fails,
# so no result is ever printed from a bad input. Binary and large cases are
# written by tests/malformed/generate.py; under the REMTONE_SANITIZE build any
# ASan/UBSan/LeakSanitizer report changes the exit code and fails the case.
set -u
bin=${REMTONE_BIN:?}
src=${REMTONE_SOURCE:?}/tests/malformed
work="${REMTONE_TMP:-/tmp}/malformed"
rm -rf "$work" && mkdir -p "$work"
/usr/bin/python3 "$src/generate.py" "$work/gen" || { echo "FAIL generate.py"; exit 1; }

# @unreadable: root reads any file whatever its mode, so as root a /proc file
# the kernel refuses to read even to root (write-only sysctl) takes its place
mkdir -p "$work/a-directory"
if [ "$(id -u)" = 0 ]; then
  unreadable=/proc/sys/vm/compact_memory
else
  unreadable="$work/unreadable.edf"
  cp "$work/gen/good.edf" "$unreadable" && chmod 000 "$unreadable"
fi
[ -e "$unreadable" ] && ! head -c1 "$unreadable" >/dev/null 2>&1 || unreadable=
mkfifo "$work/a-fifo"

fails=0 cases=0
while IFS=$'\t' read -r file command want fragment; do
  case $file in ''|'#'*) continue ;; esac
  cases=$((cases + 1))
  case $file in
    @directory) path="$work/a-directory" ;;
    @fifo) path="$work/a-fifo" ;;
    @unreadable)
      if [ -z "$unreadable" ]; then echo "skip $file $command: no unreadable file here"; continue; fi
      path=$unreadable ;;
    *) if [ -f "$src/$file" ]; then path="$src/$file"; else path="$work/gen/$file"; fi ;;
  esac
  cmd=${command//\{file\}/$path}
  cmd=${cmd//\{good\}/$work/gen/good.edf}
  cmd=${cmd//\{stages\}/$src/good-stages.csv}
  # the words of the command are paths without spaces (all made here)
  read -r -a args <<<"$cmd"
  timeout 60 "$bin" "${args[@]}" >"$work/out" 2>"$work/err" </dev/null
  got=$?
  name="$file: remtone $command"
  if [ "$got" = 124 ]; then
    echo "FAIL $name: no answer within 60 s"; fails=$((fails + 1)); continue
  fi
  if [ "$got" != "$want" ]; then
    echo "FAIL $name: exit $got, want $want"; sed 's/^/    /' "$work/err" | head -8
    fails=$((fails + 1)); continue
  fi
  if [ -n "$fragment" ] && ! grep -qF -- "$fragment" "$work/err"; then
    echo "FAIL $name: '$fragment' not in the message:"; sed 's/^/    /' "$work/err" | head -3
    fails=$((fails + 1)); continue
  fi
  if [ "$want" != 0 ] && [ -s "$work/out" ]; then
    echo "FAIL $name: printed a result on standard output after failing:"; head -3 "$work/out"
    fails=$((fails + 1)); continue
  fi
  if [ "$want" != 0 ] && ! grep -q '^remtone' "$work/err"; then
    echo "FAIL $name: failed without a message"; fails=$((fails + 1)); continue
  fi
  echo "ok   $name"
done <"$src/expected.tsv"

[ "$(id -u)" = 0 ] || chmod 600 "$work/unreadable.edf" 2>/dev/null
echo "$cases cases, $fails failed"
[ "$fails" = 0 ]
