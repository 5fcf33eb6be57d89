#!/usr/bin/env bash
# Run one qkd-audit job (sweep, hunt or run) as a Slurm job array, one shard per array
# task, and merge the shards in a job that starts when every task has succeeded.
#
# Usage:
#   examples/slurm-shards.sh N OUTPUT -- SUBCOMMAND [ARGUMENTS...]
#
#   N        number of shards (array tasks 1..N); more shards than work units is fine
#   OUTPUT   what `qkd-audit merge -o` writes: the CSV file of a sweep, the folder of a
#            hunt, or the folder that receives <campaign name>/ for a run
#
# Examples:
#   examples/slurm-shards.sh 16 results -- run campaigns/demo-single-photon.toml
#   examples/slurm-shards.sh 8 sweep.csv -- sweep --attack-file attacks/pauli.toml --steps 2000
#
# Environment (all optional):
#   QKD_AUDIT    the qkd-audit binary (default: qkd-audit on PATH); give an absolute path
#   SHARD_DIR    folder for the partial results and the Slurm logs (default: shards-<time>)
#   SBATCH_OPTS  extra sbatch options for both jobs, e.g. "--partition=short --time=01:00:00"
#   WAIT=1       block until the merge job ends and exit with its status (sbatch --wait)
#
# Every array task runs in the submission directory (sbatch's default) and writes
# SHARD_DIR/<subcommand>-shard-K-of-N.toml; the merge refuses a missing, duplicated or
# mismatched shard, so a failed task never yields a partial result.
set -euo pipefail

if [[ $# -lt 4 || $3 != "--" ]]; then
    sed -n '2,/^set -euo/p' "$0" | sed '$d' | sed 's/^# \{0,1\}//' >&2
    exit 2
fi
n=$1
output=$2
shift 3
if ! [[ $n =~ ^[1-9][0-9]*$ ]]; then
    echo "error: N must be a positive whole number, got '$n'" >&2
    exit 2
fi
bin=${QKD_AUDIT:-qkd-audit}
dir=${SHARD_DIR:-shards-$(date +%Y%m%d-%H%M%S)}
mkdir -p "$dir"
# shellcheck disable=SC2206
extra=(${SBATCH_OPTS:-})

# The subcommand and its arguments, quoted for the job's shell.
job=$(printf '%q ' "$bin" "$@")
array_id=$(sbatch --parsable "${extra[@]}" --job-name=qkd-audit-shard --array="1-$n" \
    --output="$dir/slurm-%A_%a.out" \
    --wrap="$job --shard \${SLURM_ARRAY_TASK_ID}/$n --shard-dir $(printf '%q' "$dir")")
array_id=${array_id%%;*}
echo "submitted array job $array_id ($n shards) writing to $dir" >&2

merge=$(printf '%q ' "$bin" merge "$dir" -o "$output")
wait_opt=()
if [[ ${WAIT:-0} == 1 ]]; then
    wait_opt=(--wait)
fi
merge_id=$(sbatch --parsable "${extra[@]}" "${wait_opt[@]}" --job-name=qkd-audit-merge \
    --dependency="afterok:$array_id" --kill-on-invalid-dep=yes \
    --output="$dir/slurm-merge-%j.out" --wrap="$merge")
merge_id=${merge_id%%;*}
echo "submitted merge job $merge_id (after every task of $array_id succeeds)" >&2
echo "$merge_id"
