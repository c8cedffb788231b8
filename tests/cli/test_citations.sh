#!/usr/bin/env bash
# Citations stand alone: code, comments, tests and docs name their source
# (a paper, a standard, a reference library, a file in this repository,
# "common practice" or "from memory"; DEVELOPERS.md), never a document that
# is not in the repository or a project ticket. A reader of the repository
# must be able to follow every reference. The words are matched as phrases,
# so "tissue", "issues a warning" or "a brief burst" do not count.
# This script itself is left out: it has to spell the phrases.
set -u
src=${REMTONE_SOURCE:?}
self=tests/cli/$(basename "$0")
fails=0

# Folders and files read (inputs made to be malformed are data, not text).
targets=(src include cli tests docs bench demo scripts fuzz .ci README.md DEVELOPERS.md SAFETY.md
         CMakeLists.txt)
excluded=(--exclude-dir=corpus --exclude-dir=malformed --exclude-dir=build)

# forbid WHAT CASE PATTERN: no line of the targets matches PATTERN (grep -E);
# CASE is "exact" or "any-case"
forbid() {
  local what=$1 pattern=$3 hits icase=()
  [ "$2" = any-case ] && icase=(-i)
  hits=$(cd "$src" && grep -rnIE "${icase[@]}" "${excluded[@]}" -- "$pattern" "${targets[@]}" 2>/dev/null |
         grep -v "^$self:")
  if [ -n "$hits" ]; then
    echo "FAIL $what:"; echo "$hits" | sed 's/^/    /'; fails=$((fails+1))
  else
    echo "ok   no $what"
  fi
}

forbid "design or project brief" any-case '\b(design|project|task|original) brief\b|\bbrief,? \(?section\b|\bthe brief([^a-z]|$| (of|says|asks|wants))|\(brief[;:,)]'
forbid "issue as a ticket" any-case '\bthe ([a-z-]+ ){0,2}issue\b|\b(see|per|in|from) issue\b|\bissue ?#?[0-9]+\b'
forbid "ticket" any-case '\b(the|a|this|that|see|per) tickets?\b|\btickets? ?#?[0-9]+\b'
forbid "numbered pull request or bug" any-case '\b(bug|PR|pull request|merge request) ?#[0-9]+'

echo "$fails failed"
[ "$fails" = 0 ]
