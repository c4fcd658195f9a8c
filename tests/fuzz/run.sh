#!/bin/sh
# Build the fuzzers (build.sh) and run each for a bounded time; fail on any
# crash, leak, time-out, sanitizer report or failed check. Prints one line a
# fuzzer: executions, corpus size, coverage.
#
#   tests/fuzz/run.sh [SECONDS [FUZZER...]]
#
# SECONDS: per fuzzer (default 60); FUZZER: model, base, campaign, pair, urdf
# (default all, one after the other: never two at once on a shared
# machine). TWF_FUZZ_OUT: build and work folder (default build-fuzz at the
# top). Inputs that a run adds are kept in $TWF_FUZZ_OUT/corpus/FUZZER and
# used by the next run; crash inputs go to $TWF_FUZZ_OUT/artifacts/FUZZER.
# A crash input belongs in regressions/FUZZER/ once understood (README.md).
set -u
here=$(cd "$(dirname "$0")" && pwd)
top=$(cd "$here/../.." && pwd)
secs=${1:-60}
[ $# -gt 0 ] && shift
fuzzers=${*:-model base campaign pair urdf}
out=${TWF_FUZZ_OUT:-$top/build-fuzz}

case $secs in
  ''|*[!0-9]*) echo "run.sh: SECONDS must be a whole number, not '$secs'" >&2; exit 2 ;;
esac

"$here/build.sh" "$out" >/dev/null || { echo "run.sh: build failed" >&2; exit 2; }
out=$(cd "$out" && pwd)

# Open bugs (known.txt) that the fuzzers would hit within seconds and stop
# at: the checks named here are skipped in these runs (fuzz.h). Empty it
# once they are fixed; the replay in make check keeps them as expected
# failures meanwhile.
TWF_FUZZ_TOLERATE=${TWF_FUZZ_TOLERATE-nul-accepted,nonfinite-model,write-overflow}
export TWF_FUZZ_TOLERATE
# A leak is a failure, and so is any undefined behaviour (the build makes
# it fatal); symbolised stacks in the log.
ASAN_OPTIONS=${ASAN_OPTIONS:-detect_leaks=1:allocator_may_return_null=1}
UBSAN_OPTIONS=${UBSAN_OPTIONS:-print_stacktrace=1:halt_on_error=1}
export ASAN_OPTIONS UBSAN_OPTIONS

passed=0
failed=0
for f in $fuzzers; do
  case $f in
    model) dict=model.dict ;;
    base) dict=base.dict ;;
    campaign|pair) dict=campaign.dict ;;
    urdf) dict=urdf.dict ;;
    *) echo "run.sh: unknown fuzzer '$f' (model, base, campaign, pair, urdf)" >&2; exit 2 ;;
  esac
  work=$out/corpus/$f
  arts=$out/artifacts/$f
  log=$out/fuzz_$f.log
  mkdir -p "$work" "$arts"
  # -timeout: one input taking seconds is a hang (the readers take
  # microseconds); -rss_limit_mb: a reader that balloons is a bug too.
  "$out/fuzz_$f" -max_total_time="$secs" -print_final_stats=1 -timeout=10 \
    -rss_limit_mb=2048 -dict="$here/dict/$dict" -artifact_prefix="$arts/" \
    "$work" "$here/corpus/$f" >"$log" 2>&1
  rc=$?
  execs=$(sed -n 's/^stat::number_of_executed_units: *//p' "$log" | tail -n 1)
  added=$(sed -n 's/^stat::new_units_added: *//p' "$log" | tail -n 1)
  last=$(grep -a -E '(DONE|INITED|NEW|REDUCE|pulse) +cov:' "$log" | tail -n 1)
  corp=$(printf '%s\n' "$last" | sed -n 's/.*corp: \([0-9]*\)\/\([^ ]*\).*/\1 units (\2)/p')
  cov=$(printf '%s\n' "$last" | sed -n 's/.*cov: \([0-9]*\).*/\1/p')
  if [ "$rc" -ne 0 ] ||
     grep -a -q -E 'ERROR: (AddressSanitizer|LeakSanitizer|libFuzzer)|runtime error:|check failed:' "$log"; then
    failed=$((failed + 1))
    echo "FAIL: fuzz_$f (exit $rc) after ${execs:-?} executions; log $log; inputs:"
    ls "$arts" | sed "s|^|  $arts/|"
    grep -a -v -E '^#[0-9]+|^INFO:|^	NEW_FUNC' "$log" | tail -n 40 | sed 's/^/  | /'
  else
    passed=$((passed + 1))
    echo "fuzz_$f: ${execs:-?} executions in $secs s, corpus ${corp:-?}, ${added:-0} new, coverage ${cov:-?} edges: ok"
  fi
done
echo "fuzz: $passed passed, $failed failed"
[ "$failed" -eq 0 ]
