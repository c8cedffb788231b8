#!/usr/bin/env bash
# Running out of memory anywhere: remtone_failalloc is the command-line program
# linked with tests/alloc/fail_alloc.c, which fails the Nth allocation of the
# process (REMTONE_TEST_FAIL_ALLOC=N) -- remtone's own and those of the C
# library, FFTW, libxml2, jansson and EDFlib alike. `remtone score` on a short
# synthetic night is run with the text summary, with --json and with --html;
# a counting run first gives every allocation of each (REMTONE_TEST_COUNT_ALLOC:
# one letter per allocation, 'f' when FFTW asked for it). For each N tried:
#  - the exit code is 8, "out of memory" (README.md, "Exit codes"), and standard
#    error says "out of memory"; a failure the program gets round (the C
#    library's own fallbacks) may instead exit 0, with the same output as the
#    run without a failure;
#  - no output file is left: neither the final name nor a temporary PATH.tmp-*;
#  - no crash and, in the sanitizer build, no leak (LeakSanitizer, on by
#    default with AddressSanitizer, changes the exit code and prints a report;
#    tests/alloc/lsan.supp names the one leak that is libxml2's own).
# In the ordinary build the program's frees are not counted against its
# allocations: the C library and the dependencies keep blocks for the life of
# the process, so leaks are LeakSanitizer's to find, in build-asan/.
# `remtone cohort-merge` is swept the same way (below): a failure leaves no
# file in the folder but its nights/, untouched.
# A run takes 0.1-0.5 s (more under AddressSanitizer) and one night makes
# 18000-36000 allocations (FFTW's planner alone 17000, libxml2 another 17000
# for the page), so not every N is tried by default: the first 15 allocations
# of the text run (start-up, options, opening the files) all, then, per
# output, one N drawn at random from each of 16 equal strata of the
# allocations that are not FFTW's, and from 3 strata of FFTW's (whose failures
# all end in one handler, cli/fftw_abort.c): about 100 runs, under a minute in
# either build. Every run draws anew and prints its seed (REMTONE_SEED=S
# repeats it); REMTONE_ALLOC_STRATA=K draws from K strata instead of 16, and
# REMTONE_ALLOC_ALL=1 tries every N (hours).
set -u
bin=${REMTONE_BIN:?}
fa=${REMTONE_FAILALLOC_BIN:?}
work="${REMTONE_TMP:-/tmp}/alloc-failure"
rm -rf "$work" && mkdir -p "$work"
fails=0
bad() { echo "FAIL $1"; fails=$((fails + 1)); }
export LSAN_OPTIONS="suppressions=${REMTONE_SOURCE:?}/tests/alloc/lsan.supp${LSAN_OPTIONS:+:$LSAN_OPTIONS}"
strata=${REMTONE_ALLOC_STRATA:-16}

# A short night: one hour of synthetic RBD, staged for four minutes only (two
# N2 epochs, then REM), so scoring conditions little and every stage of the
# pipeline still runs.
"$bin" synth --profile rbd --hours 1 --seed 3 --out "$work/n" >/dev/null || { echo "FAIL synth"; exit 1; }
rec="$work/n/night.edf"
stages="$work/stages.csv"
printf 'start_s,duration_s,stage\n2880,60,N2\n2940,180,R\n' > "$stages"

seed=${REMTONE_SEED:-$(( $(date +%s) % 100000 ))}
echo "seed $seed (REMTONE_SEED=$seed repeats this run)"

# same A B: the two outputs agree but for the time of the run they carry
same() {
  cmp -s <(sed -E 's/"run_at": "[^"]*"//; s/[0-9]{4}-[0-9]{2}-[0-9]{2} [0-9]{2}:[0-9]{2} UTC//' "$1") \
         <(sed -E 's/"run_at": "[^"]*"//; s/[0-9]{4}-[0-9]{2}-[0-9]{2} [0-9]{2}:[0-9]{2} UTC//' "$2")
}

# pick KINDS_FILE FIRST_ALL STRATA_OTHER STRATA_FFTW: the N to try, one a line
pick() {
  awk -v seed="$seed" -v first="$2" -v so="$3" -v sf="$4" -v all="${REMTONE_ALLOC_ALL:-0}" '
    { s = s $0 }
    END {
      srand(seed); no = 0; nf = 0
      for (i = 1; i <= length(s); i++) {
        if (substr(s, i, 1) == "f") f[++nf] = i; else o[++no] = i
      }
      if (all == 1) { for (i = 1; i <= length(s); i++) print i; exit }
      for (i = 1; i <= first && i <= length(s); i++) print i
      strata(o, no, so); strata(f, nf, sf)
    }
    function strata(v, n, k,   j, a, b) {
      if (n == 0) return
      if (k > n) k = n
      for (j = 0; j < k; j++) {
        a = int(j * n / k) + 1; b = int((j + 1) * n / k)
        print v[a + int(rand() * (b - a + 1))]
      }
    }' "$1" | sort -n -u
}

# verdict NAME N RC: what every run with the Nth allocation failed is held to, from its exit
# code RC and $work/stderr. Returns 0 for a failure reported as out of memory (exit 8 and the
# words), 1 for exit 0 (the caller compares the output with the reference), 2 for a run not
# judged (below), 3 after counting a failure.
verdict() {
  if grep -q 'CHECK failed: sanitizer_linux_libcdep.cpp.*pthread_getattr_np' "$work/stderr"; then
    # AddressSanitizer's own set-up of a new thread calls pthread_getattr_np,
    # which allocates through the failing allocator; the sanitizer then stops
    # the process by design. Not remtone's allocation: counted, not judged.
    return 2
  elif grep -qE 'Sanitizer|runtime error' "$work/stderr"; then
    bad "$1 N=$2: sanitizer report: $(grep -m1 -E 'Sanitizer|runtime error' "$work/stderr")"
  elif [ "$3" = 0 ]; then
    return 1
  elif [ "$3" != 8 ]; then
    bad "$1 N=$2: exit $3, want 8: $(head -2 "$work/stderr" | tr '\n' ' ')"
  elif ! grep -q 'out of memory' "$work/stderr"; then
    bad "$1 N=$2: stderr does not say out of memory: $(head -2 "$work/stderr" | tr '\n' ' ')"
  else
    return 0
  fi
  return 3
}

# sweep NAME FIRST_ALL NIGHTS ARGS...: count the allocations of `remtone ARGS...`, then fail
# each N picked. Its folder $work/NAME is laid anew before every run: empty, or holding a copy
# of the folder NIGHTS as nights/ (a cohort's results, for cohort-merge). A run that fails must
# leave nothing in the folder but nights/, untouched; one that gets round its failure must
# leave every file the run without a failure wrote, whole, and print the same.
sweep() {
  local name=$1 first=$2 nights=$3; shift 3
  local out="$work/$name" ref="$work/$name.refdir"
  lay() { rm -rf "$out" && mkdir -p "$out" && { [ -z "$nights" ] || cp -a "$nights" "$out/nights"; }; }
  lay
  if ! REMTONE_TEST_COUNT_ALLOC="$work/$name.kinds" "$fa" "$@" \
       >"$work/$name.ref" 2>"$work/$name.referr"; then
    bad "$name: the run without a failure fails: $(head -2 "$work/$name.referr")"
    return
  fi
  rm -rf "$ref" && cp -a "$out" "$ref"
  local total tried=0 zero=0 n rc f left before=$fails
  total=$(wc -c <"$work/$name.kinds")
  for n in $(pick "$work/$name.kinds" "$first" "$strata" 3); do
    tried=$((tried + 1))
    lay
    REMTONE_TEST_FAIL_ALLOC=$n "$fa" "$@" >"$work/stdout" 2>"$work/stderr" </dev/null
    rc=$?
    if [ -n "$nights" ] && ! diff -r -q "$out/nights" "$nights" >/dev/null; then
      bad "$name N=$n: nights/ changed"
    fi
    verdict "$name" "$n" "$rc"
    case $? in
      0) left=$(find "$out" -mindepth 1 -maxdepth 1 ! -name nights | head -3)
         if [ -n "$left" ]; then bad "$name N=$n: left $(echo $left)"; fi ;;
      1) zero=$((zero + 1))
         # only a failure something got round: the same output as without it
         for f in $(cd "$ref" && find . -type f ! -path './nights/*'); do
           if ! [ -f "$out/$f" ] || ! same "$out/$f" "$ref/$f"; then
             bad "$name N=$n: exit 0 without the whole $f"
           fi
         done
         if [ -n "$(find "$out" -name '*.tmp-*')" ]; then
           bad "$name N=$n: exit 0 leaving $(find "$out" -name '*.tmp-*' | head -1)"
         elif ! cmp -s "$work/stdout" "$work/$name.ref"; then
           bad "$name N=$n: exit 0 with a different summary"
         fi ;;
      2) zero=$((zero + 1)) ;;
    esac
  done
  [ "$fails" = "$before" ] && echo "ok   $name: $tried of $total allocations failed in turn ($zero got round)"
}

night=(score "$rec" --stages "$stages")
sweep text 15 "" "${night[@]}"
sweep json 0 "" "${night[@]}" --quiet --json "$work/json/r.json"
sweep html 0 "" "${night[@]}" --quiet --html "$work/html/r.html"
# a reviewer's decisions (docs/corrections.md): read, checked, rescored
printf 'elapsed_s,role,decision,reason,reviewer,decided_at\n2943,chin,confirm,,A,2026-12-01\n2946,arm-left,confirm,,A,2026-12-01\n2952,chin,exclude,artifact,A,2026-12-01\n' >"$work/decisions.csv"
sweep corrections 0 "" "${night[@]}" --quiet --corrections "$work/decisions.csv" --json "$work/corrections/r.json"
# a lab's norms file (docs/scoring.md, "A lab's norms file"; invented numbers): read, a stratum
# chosen per index, placed
printf '# invented numbers\nindex,sex,age_from,age_to,percentile,value,unit,source,method\nsinbar.chin_any_3s,F,60,70,95,7.5,%%,invented,visual\nrai,any,20,90,5,0.8,ratio,invented,\n' >"$work/norms.csv"
sweep norms 0 "" "${night[@]}" --quiet --norms "$work/norms.csv" --age 64 --sex F --json "$work/norms/r.json"

# ---- cohort-merge (docs/cohort.md): the nights' results read back with jansson, the table,
# the subjects, the calibration overall and per stratum (--by-sex, --age-bands), their cutoff
# files and the page. A folder of five nights -- two synthetic RBD nights as cases, two
# typical-older nights as controls, one whose staging is refused (a failure record) -- each
# with a subject, an age and a sex, is scored once; every merge then starts from a copy of its
# nights/ alone. A merge that fails leaves no file but nights/, untouched (an earlier merge's
# files would stay as they were: docs/cohort.md, "Files"); one that gets round a failure
# writes the very files and summary of the merge without one.
"$bin" synth --profile typical-older --hours 1 --seed 4 --out "$work/o" >/dev/null || { echo "FAIL synth"; exit 1; }
printf 'start_s,duration_s,stage\n0,30,Q\n' >"$work/bad-stages.csv"
{
  echo "id,recording,stages,events,group,subject,age,sex"
  echo "a,$rec,$stages,,case,s1,64,F"
  echo "b,$work/o/night.edf,$stages,,control,s2,50,M"
  echo "c,$rec,$stages,,case,s3,55,M"
  echo "d,$work/o/night.edf,$stages,,control,s4,66,F"
  echo "e,$rec,$work/bad-stages.csv,,case,s5,70,F"
} >"$work/manifest.csv"
"$bin" cohort "$work/manifest.csv" --out "$work/cohort" --jobs 1 --quiet ||
  { echo "FAIL the cohort run: exit $?"; exit 1; }

sweep merge 15 "$work/cohort/nights" cohort-merge "$work/merge" --by-sex --age-bands 60

echo "$fails failed"
[ "$fails" = 0 ]
