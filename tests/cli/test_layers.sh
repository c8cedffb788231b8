#!/usr/bin/env bash
# The layering of src/ (DEVELOPERS.md): dsp/ is beneath quality/ and score/,
# and neither quality/ nor report/ reaches up into score/'s private headers;
# the CLI uses the public API only; the staging files call in one direction
# (load.c -> loaders -> timeline.c); only src/io/ calls EDFlib, where every
# call runs under the EDFlib lock (src/io/edflib_lock.h). A check on #include
# lines, so a change that breaks the layering fails here.
set -u
src=${REMTONE_SOURCE:?}
fails=0
forbid() { # forbid DIR PATTERN WHY
  local hits
  hits=$(grep -rnE "^#include \"$2" "$src/$1" 2>/dev/null)
  if [ -n "$hits" ]; then echo "FAIL $1 includes $2 ($3):"; echo "$hits" | sed 's/^/    /'; fails=$((fails+1))
  else echo "ok   $1 does not include $2"; fi
}
forbid src/dsp 'score/' "dsp is beneath score"
forbid src/dsp 'quality/' "dsp is beneath quality"
forbid src/quality 'score/' "quality is beneath score"
forbid src/report 'score/' "reports read the public result"
forbid src/report 'quality/' "reports read the public result"
forbid cli '(score|quality|dsp|report|common|io|staging|synth|cohort|roles)/' "the CLI uses the public API"
# The staging files in one direction (DEVELOPERS.md): timeline.c is the object
# every loader builds through and calls no loader; the loaders (tables.c,
# annotations.c, xml.c; labels.c beside them) never call the dispatcher;
# load.c tells the format and calls the loaders. A check on calls and on
# where the functions are defined.
calls() { # calls FILES PATTERN WHY: FILES must not call PATTERN
  local hits
  hits=$(cd "$src/src/staging" && grep -nE "$2\(" $1 2>/dev/null)
  if [ -n "$hits" ]; then echo "FAIL staging/{$1} calls $2 ($3):"; echo "$hits" | sed 's/^/    /'; fails=$((fails+1))
  else echo "ok   staging/{$1} does not call $2"; fi
}
calls timeline.c 'rt_timeline_load_[a-z_]+|rt_recording_[a-z_]+|rt_labelmap_load' "timeline.c is beneath the loaders"
calls "tables.c annotations.c xml.c labels.c" 'rt_timeline_load_staging' "the dispatcher is above the loaders"
defined_in() { # defined_in FILE PATTERN: functions matching PATTERN are defined in FILE only
  local hits
  hits=$(grep -nE "^[a-z_][a-z_ ]*[ *]($2)\(" "$src"/src/*/*.c | grep -v "^$src/src/staging/$1:")
  if [ -n "$hits" ]; then echo "FAIL $2 defined outside staging/$1:"; echo "$hits" | sed 's/^/    /'; fails=$((fails+1))
  else echo "ok   $2 defined in staging/$1 only"; fi
}
defined_in timeline.c 'rt_timeline_(new|free|add_[a-z_]+|merge|check)'
defined_in load.c 'rt_timeline_load_staging'
# EDFlib is not thread-safe: outside src/io/ no library, CLI, benchmark, fuzz
# or tool source includes it. (The unit tests do: they use EDFlib as an
# independent reference, single-threaded, to write files and to check reads;
# so does fuzz/fuzz_recording.c, which compares remtone's annotations with
# EDFlib's in a single-threaded process, after remtone has closed the file.)
hits=$(grep -rnE '^#include [<"]edflib\.h[>"]' "$src/src" "$src/include" "$src/cli" "$src/bench" \
         "$src/fuzz" "$src/tests/tools" 2>/dev/null | grep -v "^$src/src/io/" \
         | grep -v "^$src/fuzz/fuzz_recording\.c:")
if [ -n "$hits" ]; then echo "FAIL edflib.h included outside src/io (EDFlib calls belong under the lock there):"
  echo "$hits" | sed 's/^/    /'; fails=$((fails+1))
else echo "ok   only src/io includes edflib.h"; fi
echo "$fails failed"
[ "$fails" = 0 ]
