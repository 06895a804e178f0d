#!/bin/bash
# Submits one extraction as a Slurm job array of N shards plus a merge job that runs when all of them succeed.
#
#   tools/slurm/submit.sh --shards N --model DIR --input FILE --runs DIR --out DIR [--cpus C] [--wait] [-- extract options]
#
# --shards N  array tasks, one shard each (default 4)
# --model     model folder, and --input the text file: on storage every node sees
# --runs      folder for the shard run folders (shard-K-of-N) and the jobs' logs (logs/)
# --out       the merged run folder, written by the merge job
# --cpus C    CPUs per array task (default 4); assay runs that many threads (SLURM_CPUS_PER_TASK)
# --wait      wait for the merge job and exit 0 only if it COMPLETED (sbatch --wait alone exits 0 for a merge job
#             cancelled because a shard failed)
# After --, options for assay extract (--features, --prompt, ...). ASSAY sets the assay command (default: assay).
# Prints the array's and the merge's job ids.
set -euo pipefail
here=$(cd "$(dirname "$0")" && pwd)
shards=4 cpus=4 wait=0 model="" input="" runs="" out=""
while [ $# -gt 0 ]; do
  case "$1" in
    --shards) shards=$2; shift 2 ;;
    --model) model=$2; shift 2 ;;
    --input) input=$2; shift 2 ;;
    --runs) runs=$2; shift 2 ;;
    --out) out=$2; shift 2 ;;
    --cpus) cpus=$2; shift 2 ;;
    --wait) wait=1; shift ;;
    --) shift; break ;;
    *) echo "submit.sh: unknown option $1 (see the comment at the top of $0)" >&2; exit 64 ;;
  esac
done
for v in model input runs out; do
  [ -n "${!v}" ] || { echo "submit.sh: --$v is required" >&2; exit 64; }
done
mkdir -p "$runs/logs"
array=$(sbatch --parsable --array="0-$((shards - 1))" --cpus-per-task="$cpus" --output="$runs/logs/task-%a.log" \
  "$here/extract-array.sbatch" "$input" "$model" "$runs" "$@")
array=${array%%;*}
merge=$(sbatch --parsable --dependency="afterok:$array" --kill-on-invalid-dep=yes --output="$runs/logs/merge.log" \
  "$here/merge.sbatch" "$runs" "$shards" "$out")
merge=${merge%%;*}
echo "array $array ($shards shards), merge $merge"
[ "$wait" = 1 ] || exit 0
unknown=0
while true; do
  state=$(scontrol show job -o "$merge" 2>/dev/null | sed -n 's/.*JobState=\([A-Z_]*\).*/\1/p')
  case "$state" in
    COMPLETED) echo "merge $merge COMPLETED: $out"; exit 0 ;;
    PENDING|RUNNING|CONFIGURING|COMPLETING) sleep 1 ;;
    "") unknown=$((unknown + 1))
        [ "$unknown" -lt 30 ] || { echo "submit.sh: slurmctld no longer knows job $merge" >&2; exit 1; }
        sleep 1 ;;
    *) echo "merge $merge ended $state; see $runs/logs and scontrol show job $array" >&2; exit 1 ;;
  esac
done
