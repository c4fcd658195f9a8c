#!/bin/sh
# Tests of the output set that need a second process: terminating signals
# in the write phase, a file that appears while a run is working, and two
# runs on the same outputs. The program stops itself at a named point of
# the write phase when TWF_TEST_PAUSE is set ("staged": every temporary
# file complete, nothing committed; "committed": the first output is in
# place), so that each case acts at a known moment instead of racing.
set -u
SRC=${TWF_SRCDIR:-$(cd "$(dirname "$0")/../.." && pwd)}
BUILD=${TWF_BUILDDIR:-$SRC}
TWISTFIT="$BUILD/src/twistfit"
MODEL="$SRC/samples/tf6s.ini"
DATA="$SRC/samples/demo-campaign.csv"
# SIGINT of a background run of a shell script is ignored, and a shell
# cannot undo that: the runs start through a helper that sets the
# disposition of SIGINT as each case needs (INT_ACTION: default, ignore).
PYTHON=${PYTHON:-/usr/bin/python3}
INT_ACTION=default
pass=0
fail=0
dir=$(mktemp -d)
logs=$(mktemp -d)
trap 'rm -rf "$dir" "$logs"' EXIT

ok() { pass=$((pass + 1)); echo "PASS: $1"; }
bad() {
  fail=$((fail + 1)); echo "FAIL: $1: $2"
  for f in "$logs"/*.err; do [ -f "$f" ] && { echo "--- $(basename "$f"):"; head -10 "$f"; }; done
  echo "--- folder:"; ls -la "$dir"
}

# Start a run in $dir stopped at phase $1 (arguments after it); sets $pid.
start_paused() {
  phase=$1
  shift
  rm -f "$logs/a.err"
  (cd "$dir" && TWF_TEST_PAUSE=$phase exec "$PYTHON" -c '
import os, signal, sys
signal.signal(signal.SIGINT, signal.SIG_IGN if sys.argv[1] == "ignore" else signal.SIG_DFL)
# the cases expect default dispositions of the others, whatever started
# the suite (nohup ignores SIGHUP, and an ignored signal stays ignored)
signal.signal(signal.SIGHUP, signal.SIG_DFL)
signal.signal(signal.SIGTERM, signal.SIG_DFL)
os.execv(sys.argv[2], sys.argv[2:])' "$INT_ACTION" "$TWISTFIT" "$@" >/dev/null 2>"$logs/a.err") &
  pid=$!
  n=0
  # stopped, and said where: only then may a case act
  until grep -q "test pause: $phase" "$logs/a.err" 2>/dev/null &&
        [ "$(sed 's/^.*) //' "/proc/$pid/stat" 2>/dev/null | cut -c1)" = T ]; do
    n=$((n + 1))
    if [ $n -gt 600 ] || ! kill -0 "$pid" 2>/dev/null; then
      kill -KILL "$pid" 2>/dev/null
      wait "$pid" 2>/dev/null
      return 1
    fi
    sleep 0.05
  done
  return 0
}

# Send signal $1 to the stopped run and let it go on; sets $got to the
# exit status.
signal_run() {
  kill "-$1" "$pid"
  kill -CONT "$pid"
  wait "$pid"
  got=$?
}

continue_run() {
  kill -CONT "$pid"
  wait "$pid"
  got=$?
}

leftovers() { ls -A "$dir" | grep -c '\.tmp\.'; }

fresh() { rm -rf "$dir"; mkdir "$dir"; }

ALL="-o a.ini --base-output b.ini --json c.json --residuals r.csv"

# A terminating signal in the write phase: no temporary file, no output,
# death by that signal. At "committed" the first output is in place and
# must be taken back too.
for phase in staged committed; do
  for sig in TERM HUP INT; do
    case $sig in TERM) want=143 ;; HUP) want=129 ;; INT) want=130 ;; esac
    name="signal-$sig-$phase"
    fresh
    # shellcheck disable=SC2086
    if ! start_paused $phase calibrate "$MODEL" "$DATA" $ALL; then
      bad "$name" "the run did not reach the pause"; continue
    fi
    signal_run $sig
    if [ "$got" != $want ]; then bad "$name" "exit status $got, expected $want (death by SIG$sig)"
    elif [ -n "$(ls -A "$dir")" ]; then bad "$name" "files left: $(ls -A "$dir" | tr '\n' ' ')"
    else ok "$name"; fi
  done
done

# A signal ignored when the run starts (nohup, a background job) stays
# ignored: the run completes.
name=signal-ignored-stays-ignored
fresh
INT_ACTION=ignore
# shellcheck disable=SC2086
if start_paused committed calibrate "$MODEL" "$DATA" $ALL; then
  signal_run INT
  if [ "$got" != 0 ]; then bad $name "exit status $got, expected 0"
  elif [ "$(ls -A "$dir" | tr '\n' ' ')" != "a.ini b.ini c.json r.csv " ]; then
    bad $name "files: $(ls -A "$dir" | tr '\n' ' ')"
  else ok $name; fi
else
  bad $name "the run did not reach the pause"
fi
INT_ACTION=default

# With --force a signal after the first commit puts the replaced files
# back as they were.
name=signal-force-restores
fresh
for f in a.ini b.ini c.json r.csv; do printf 'old %s\n' $f >"$dir/$f"; done
# shellcheck disable=SC2086
if start_paused committed calibrate "$MODEL" "$DATA" $ALL --force; then
  signal_run TERM
  same=1
  for f in a.ini b.ini c.json r.csv; do [ "$(cat "$dir/$f")" = "old $f" ] || same=0; done
  if [ "$got" != 143 ]; then bad $name "exit status $got, expected 143"
  elif [ $same != 1 ]; then bad $name "a replaced file was not put back"
  elif [ "$(ls -A "$dir" | wc -l)" != 4 ]; then bad $name "files left: $(ls -A "$dir" | tr '\n' ' ')"
  else ok $name; fi
else
  bad $name "the run did not reach the pause"
fi

# A file that appears while the run is working is not replaced without
# --force, and nothing of the run is left.
name=appeared-during-run
fresh
if start_paused staged calibrate "$MODEL" "$DATA" -o a.ini; then
  printf 'theirs\n' >"$dir/a.ini"
  continue_run
  if [ "$got" != 4 ]; then bad $name "exit status $got, expected 4"
  elif [ "$(cat "$dir/a.ini")" != theirs ]; then bad $name "the new file was replaced"
  elif ! grep -q "appeared while this run was working" "$logs/a.err"; then bad $name "no message"
  elif [ "$(leftovers)" != 0 ]; then bad $name "temporary files left"
  else ok $name; fi
else
  bad $name "the run did not reach the pause"
fi

# A failure after the first commit takes the committed outputs back; what
# the run did not create stays as it is.
name=failure-after-first-commit
fresh
if start_paused staged calibrate "$MODEL" "$DATA" -o a.ini --json c.json; then
  printf 'theirs\n' >"$dir/c.json"
  continue_run
  if [ "$got" != 4 ]; then bad $name "exit status $got, expected 4"
  elif [ -e "$dir/a.ini" ]; then bad $name "a.ini of the failed run is left"
  elif [ "$(cat "$dir/c.json")" != theirs ]; then bad $name "the other file was touched"
  elif ! grep -q "taken back" "$logs/a.err"; then bad $name "no message that the outputs were taken back"
  elif [ "$(leftovers)" != 0 ]; then bad $name "temporary files left"
  else ok $name; fi
else
  bad $name "the run did not reach the pause"
fi

# Two runs started together on the same outputs without --force: one
# succeeds, the other fails and leaves the winner's set whole.
name=two-runs-one-set
fresh
# shellcheck disable=SC2086
if start_paused staged calibrate "$MODEL" "$DATA" $ALL; then
  # shellcheck disable=SC2086
  (cd "$dir" && "$TWISTFIT" calibrate "$MODEL" "$DATA" $ALL >/dev/null 2>"$logs/b.err")
  second=$?
  continue_run
  ids=$(cd "$dir" && { sed -n 's/^; run_id: //p' a.ini b.ini; sed -n 's/^# run_id: //p' r.csv;
                       sed -n 's/^ *"run_id": "\([0-9a-f]*\)".*/\1/p' c.json; } | sort -u | wc -l)
  if [ "$second" != 0 ]; then bad $name "the run that was not paused failed ($second)"
  elif [ "$got" != 4 ]; then bad $name "the paused run: exit status $got, expected 4"
  elif [ "$ids" != 1 ]; then bad $name "the outputs hold $ids run ids: a mixed set"
  elif [ "$(leftovers)" != 0 ]; then bad $name "temporary files left"
  else ok $name; fi
else
  bad $name "the run did not reach the pause"
fi

# Four runs on the same outputs, all stopped once their set is staged and
# then let go together, so that their commits race whatever the load (no
# timing is assumed: each run is seen stopped before any goes on). Without
# --force exactly one wins and the others fail with status 4 and leave
# nothing; with --force every run succeeds and the set left is whole and of
# one run (one run id in all four files, and verify --base accepts it). A
# last round lets four --force runs go free, unpaused.
set_ids() {
  (cd "$dir" && { sed -n 's/^; run_id: //p' a.ini b.ini; sed -n 's/^# run_id: //p' r.csv;
                  sed -n 's/^ *"run_id": "\([0-9a-f]*\)".*/\1/p' c.json; } | sort | uniq -c |
               sed 's/^ *//')
}
stray() { ls -A "$dir" | grep -c '\.tmp\.\|\.old$'; }
# Start run $1 of four, stopped at "staged" unless $2 is "free".
start_one() {
  k=$1 mode=$2
  shift 2
  rm -f "$logs/run$k.err"
  if [ "$mode" = free ]; then
    (cd "$dir" && exec "$TWISTFIT" "$@" >/dev/null 2>"$logs/run$k.err") &
  else
    (cd "$dir" && TWF_TEST_PAUSE=staged exec "$TWISTFIT" "$@" >/dev/null 2>"$logs/run$k.err") &
  fi
  eval "pid$k=\$!"
}
is_stopped() {
  grep -q "test pause: staged" "$logs/run$1.err" 2>/dev/null &&
    [ "$(sed 's/^.*) //' "/proc/$2/stat" 2>/dev/null | cut -c1)" = T ]
}
four_runs() {
  mode=$1
  shift
  for k in 1 2 3 4; do start_one $k "$mode" "$@"; done
  if [ "$mode" != free ]; then
    n=0
    for k in 1 2 3 4; do
      eval "p=\$pid$k"
      until is_stopped $k "$p"; do
        n=$((n + 1))
        if [ $n -gt 2400 ] || ! kill -0 "$p" 2>/dev/null; then
          for j in 1 2 3 4; do eval "kill -KILL \$pid$j" 2>/dev/null; done
          wait
          return 1
        fi
        sleep 0.05
      done
    done
    for k in 1 2 3 4; do eval "kill -CONT \$pid$k"; done
  fi
  statuses=
  for k in 1 2 3 4; do eval "wait \$pid$k"; statuses="$statuses $?"; done
  return 0
}
for force in "" --force; do
  name=four-runs-one-set${force:+-force}
  fresh
  # shellcheck disable=SC2086
  if ! four_runs paused calibrate "$MODEL" "$DATA" $ALL $force; then
    bad $name "the runs did not all reach the pause"; continue
  fi
  ids=$(set_ids)
  wins=$(echo $statuses | tr ' ' '\n' | grep -c '^0$')
  fails=$(echo $statuses | tr ' ' '\n' | grep -c '^4$')
  if [ -z "$force" ] && { [ "$wins" != 1 ] || [ "$fails" != 3 ]; }; then
    bad $name "exit statuses$statuses: expected one 0 and three 4"
  elif [ -n "$force" ] && [ "$wins" != 4 ]; then
    bad $name "exit statuses$statuses: expected 0 for every run"
  elif [ "$(echo "$ids" | wc -l)" != 1 ] || [ "${ids%% *}" != 4 ]; then
    bad $name "the outputs hold the run ids: $(echo $ids)"
  elif [ "$(stray)" != 0 ]; then bad $name "temporary files left"
  elif ! (cd "$dir" && "$TWISTFIT" verify a.ini "$DATA" --base b.ini >/dev/null 2>"$logs/verify.err"); then
    bad $name "verify refused the set"
  else ok $name; fi
done
name=four-free-runs-force
fresh
# shellcheck disable=SC2086
four_runs free calibrate "$MODEL" "$DATA" $ALL --force
ids=$(set_ids)
if [ "$(echo $statuses | tr ' ' '\n' | grep -c '^0$')" != 4 ]; then
  bad $name "exit statuses$statuses: expected 0 for every run"
elif [ "$(echo "$ids" | wc -l)" != 1 ] || [ "${ids%% *}" != 4 ]; then
  bad $name "the outputs hold the run ids: $(echo $ids)"
elif [ "$(stray)" != 0 ]; then bad $name "temporary files left"
else ok $name; fi

# verify --base refuses a base pose file of another run than the model;
# --allow-mixed-runs takes them with a warning.
name=verify-mixed-runs
fresh
if (cd "$dir" && "$TWISTFIT" -q calibrate "$MODEL" "$DATA" -o a.ini --base-output b.ini >/dev/null &&
    "$TWISTFIT" -q calibrate "$MODEL" "$DATA" -o a2.ini --base-output b2.ini >/dev/null); then
  (cd "$dir" && "$TWISTFIT" verify a.ini "$DATA" --base b2.ini >/dev/null 2>"$logs/mixed.err")
  got=$?
  (cd "$dir" && "$TWISTFIT" verify a.ini "$DATA" --base b2.ini --allow-mixed-runs >/dev/null 2>"$logs/allowed.err")
  allowed=$?
  if [ $got != 3 ]; then bad $name "mixed set: exit status $got, expected 3"
  elif ! grep -q "come from different runs" "$logs/mixed.err"; then bad $name "no message"
  elif [ $allowed != 0 ] || ! grep -q "warning: .*different runs" "$logs/allowed.err"; then
    bad $name "--allow-mixed-runs: exit status $allowed, or no warning"
  elif ! (cd "$dir" && "$TWISTFIT" verify a2.ini "$DATA" --base b2.ini >/dev/null); then
    bad $name "a consistent set was refused"
  else ok $name; fi
else
  bad $name "the calibrations failed"
fi

# fk writes through the same layer.
name=fk-signal
fresh
if start_paused staged fk "$MODEL" -o fk.csv; then
  signal_run TERM
  if [ "$got" != 143 ]; then bad $name "exit status $got, expected 143"
  elif [ -n "$(ls -A "$dir")" ]; then bad $name "files left: $(ls -A "$dir" | tr '\n' ' ')"
  else ok $name; fi
else
  bad $name "the run did not reach the pause"
fi

echo "output: $pass passed, $fail failed"
[ $fail = 0 ]
