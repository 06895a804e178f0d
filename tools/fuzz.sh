#!/usr/bin/env bash
# Coverage-guided fuzzing of the loaders: SharpFuzz instruments the engine (and the tokenizer and CSV libraries it
# parses with), then AFL++ (Debian's afl++) runs each target of tools/Assay.Fuzz from its seed corpus.
#
#   tools/fuzz.sh [--seconds S | --execs N] [--jobs J] [TARGET...]
#
# --seconds S  fuzz each target for S seconds (default 10: the short run CI does)
# --execs N    fuzz each target for about N executions instead (the long run: --execs 1000000)
# --jobs J     targets fuzzed at once (default 1; one core each)
# --save-corpus  afterwards, add the inputs AFL++ found new coverage with (up to 8 KiB each) to the corpus, named by
#              their SHA-256, so FuzzCorpusTests replays them in every test run
# TARGET       safetensors index config vocab merges tokenizer-json tokenizer-model lines jsonl csv tsv progress run-npy (default: all)
#
# Findings go to out/fuzz/TARGET/default/{crashes,hangs}; replay one with
#   tools/Assay.Fuzz/bin/instrumented/assay-fuzz TARGET FILE
# The managed heap is capped at 256 MiB, so an allocation without bound ends as a crash, not as a slow machine.
# Exit status: 0 when no target saved a crash or a hang, 1 otherwise, 2 when the fuzzer could not run.
set -euo pipefail
root=$(cd "$(dirname "$0")/.." && pwd)
seconds=10 execs="" jobs=1 save=0 targets=()
while [ $# -gt 0 ]; do
  case "$1" in
    --seconds) seconds=$2; shift 2 ;;
    --execs) execs=$2; shift 2 ;;
    --jobs) jobs=$2; shift 2 ;;
    --save-corpus) save=1; shift ;;
    -*) echo "fuzz.sh: unknown option $1" >&2; exit 2 ;;
    *) targets+=("$1"); shift ;;
  esac
done
[ ${#targets[@]} -gt 0 ] || targets=(safetensors index config vocab merges tokenizer-json tokenizer-model lines jsonl csv tsv progress run-npy)
command -v afl-fuzz >/dev/null || { echo "fuzz.sh: afl-fuzz not found; apt-get install afl++" >&2; exit 2; }

bin="$root/tools/Assay.Fuzz/bin/instrumented"
out="$root/out/fuzz"
rm -rf "$bin"
dotnet build "$root/tools/Assay.Fuzz/Assay.Fuzz.csproj" -c Release -o "$bin" -nologo -v quiet >/dev/null
(cd "$root" && dotnet tool restore >/dev/null)
for dll in Assay.Engine Microsoft.ML.Tokenizers CsvHelper; do
  (cd "$root" && dotnet sharpfuzz "$bin/$dll.dll")
done

export AFL_SKIP_BIN_CHECK=1 AFL_NO_UI=1 AFL_SKIP_CPUFREQ=1 AFL_I_DONT_CARE_ABOUT_MISSING_CRASHES=1 \
  AFL_FORKSRV_INIT_TMOUT=60000 AFL_NO_AFFINITY=1 DOTNET_GCHeapHardLimit=0x10000000
if [ -n "$execs" ]; then limit=(-E "$execs"); else limit=(-V "$seconds"); fi

fuzz_one() {
  local t=$1
  rm -rf "$out/$t"
  mkdir -p "$out/$t"
  afl-fuzz -i "$root/tools/Assay.Fuzz/corpus/$t" -o "$out/$t" -t 5000 "${limit[@]}" -- "$bin/assay-fuzz" "$t" \
    >"$out/$t/afl.log" 2>&1 || { echo "fuzz.sh: afl-fuzz failed on $t; see $out/$t/afl.log" >&2; return 2; }
}

running=0 status=0
for t in "${targets[@]}"; do
  fuzz_one "$t" &
  running=$((running + 1))
  if [ "$running" -ge "$jobs" ]; then wait -n || status=2; running=$((running - 1)); fi
done
while [ "$running" -gt 0 ]; do wait -n || status=2; running=$((running - 1)); done

printf '%-15s %12s %10s %8s %8s %6s %8s\n' target executions "per sec" corpus crashes hangs seconds
for t in "${targets[@]}"; do
  stats="$out/$t/default/fuzzer_stats"
  [ -f "$stats" ] || { printf '%-15s (no statistics; see %s)\n' "$t" "$out/$t/afl.log"; status=2; continue; }
  get() { awk -F' *: *' -v k="$1" '$1 == k { print $2 }' "$stats"; }
  crashes=$(get saved_crashes) hangs=$(get saved_hangs)
  start=$(get start_time) last=$(get last_update)
  printf '%-15s %12s %10s %8s %8s %6s %8s\n' "$t" "$(get execs_done)" "$(get execs_per_sec)" "$(get corpus_count)" \
    "$crashes" "$hangs" "$((last - start))"
  if [ "$crashes" != 0 ] || [ "$hangs" != 0 ]; then
    [ "$status" = 2 ] || status=1
    ls "$out/$t/default/crashes" "$out/$t/default/hangs" 2>/dev/null | grep -v README | sed "s|^|  |"
  fi
done
if [ "$save" = 1 ]; then
  for t in "${targets[@]}"; do
    added=0
    for f in "$out/$t/default/queue"/id:*; do
      case "$f" in *orig:*) continue ;; esac   # the seeds themselves
      [ "$(stat -c %s "$f")" -le 8192 ] || continue
      name="found-$(sha256sum "$f" | cut -c1-16)"
      [ -e "$root/tools/Assay.Fuzz/corpus/$t/$name" ] || { cp "$f" "$root/tools/Assay.Fuzz/corpus/$t/$name"; added=$((added + 1)); }
    done
    echo "$t: $added inputs added to tools/Assay.Fuzz/corpus/$t"
  done
fi
exit "$status"
