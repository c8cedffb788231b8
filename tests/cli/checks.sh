# Helpers the command-line tests source: `check NAME EXPECTED_EXIT CMD...`
# runs CMD with its output in $work/out and $work/err and compares the exit
# code; `has NAME FILE TEXT` looks for TEXT in FILE. Both print ok/FAIL and
# count failures in $fails. The caller sets $work and fails=0.
check() { # check NAME EXPECTED_EXIT CMD...
  local name=$1 want=$2; shift 2
  "$@" >"$work/out" 2>"$work/err"; local got=$?
  if [ "$got" != "$want" ]; then
    echo "FAIL $name: exit $got, want $want"; sed 's/^/    /' "$work/err" | head -5; fails=$((fails+1))
  else
    echo "ok   $name"
  fi
}
has() { # has NAME FILE TEXT
  if grep -qF -- "$3" "$2"; then echo "ok   $1"; else echo "FAIL $1: '$3' not in $2"; fails=$((fails+1)); fi
}
