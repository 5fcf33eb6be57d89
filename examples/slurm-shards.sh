#!/usr/bin/env bash
# Run one qkd-audit job (sweep, hunt, run or tolerance) as a Slurm job array, one shard
# per array task, and merge the shards in a job that starts when every task has succeeded.
#
# A tolerance search runs in rounds (each bisection step needs the step before): for it
# this script stays in the foreground, submits one array and one merge per round, waits for
# each, and ends when the merge reports the search finished. It then prints the merge's
# result (the sentence, or the JSON) and exits with the search's status. Run it where it
# may wait: under nohup, in tmux, or as a one-CPU batch job of its own.
#
# Usage:
#   examples/slurm-shards.sh N OUTPUT -- SUBCOMMAND [ARGUMENTS...]
#
#   N        number of shards (array tasks 1..N); more shards than work units is fine
#   OUTPUT   what `qkd-audit merge -o` writes: the CSV file of a sweep, the folder of a
#            hunt, the folder that receives <campaign name>/ for a run, or the evidence
#            CSV of a tolerance search
#
# Examples:
#   examples/slurm-shards.sh 16 results -- run campaigns/demo-single-photon.toml
#   examples/slurm-shards.sh 8 sweep.csv -- sweep --attack-file attacks/pauli.toml --steps 2000
#   examples/slurm-shards.sh 32 evidence.csv -- tolerance my-campaign.toml --key signals \
#       --from 1e4 --to 1e10 --scale log --trials 100000
#
# Environment (all optional):
#   QKD_AUDIT    the qkd-audit binary (default: qkd-audit on PATH); give an absolute path
#   SHARD_DIR    folder for the partial results and the Slurm logs (default: shards-<time>)
#   SBATCH_OPTS  extra sbatch options for both jobs, e.g. "--partition=short --time=01:00:00"
#   WAIT=1       block until the merge job ends and exit with its status (sbatch --wait);
#                a tolerance search always waits
#   MAX_ROUNDS   a tolerance search stops (exit 2, its state kept) after this many rounds
#                (default 200); run the script again with the same SHARD_DIR to go on
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
again=""
json_opt=()
for a in "$@"; do
    if [[ $a == --json ]]; then
        json_opt=(--json) # the search's report as JSON: asked of the merge that finishes it
    fi
done
if [[ $1 == tolerance ]]; then
    if [[ -e $output ]]; then
        echo "error: $output exists; the search's last merge would refuse to replace it" >&2
        exit 2
    fi
    # A task requeued by Slurm replaces its own partial file of this round.
    again=" --force"
    # Going on with a search begun earlier in SHARD_DIR: its rounds so far.
    state="$dir/tolerance-state.toml"
    if grep -q '^finished = true' "$state" 2>/dev/null; then
        echo "the search in $dir is finished; its result again:" >&2
        exec "$bin" merge "$dir" -o "$output" "${json_opt[@]}"
    fi
    # Rounds merged so far, from the search's state (empty before the first merge).
    merged_rounds() { sed -n 's/^rounds = \([0-9]*\)$/\1/p' "$state" 2>/dev/null || true; }
    done_rounds=$(merged_rounds)
fi
array_id=$(sbatch --parsable "${extra[@]}" --job-name=qkd-audit-shard --array="1-$n" \
    --output="$dir/slurm-%A_%a.out" \
    --wrap="$job --shard \${SLURM_ARRAY_TASK_ID}/$n --shard-dir $(printf '%q' "$dir")$again")
array_id=${array_id%%;*}
echo "submitted array job $array_id ($n shards) writing to $dir" >&2

merge=$(printf '%q ' "$bin" merge "$dir" -o "$output")
if [[ $1 == tolerance ]]; then
    # Rounds: the array computes the looks the search needs next; the merge adds them to
    # $dir/tolerance-state.toml and, once the search is finished, writes OUTPUT and prints
    # the result. A round whose merge did not advance the state (a failed or cancelled task)
    # stops the loop, as does MAX_ROUNDS.
    merge+="${json_opt[*]/#/ }"
    max_rounds=${MAX_ROUNDS:-200}
    round=$((${done_rounds:-0} + 1))
    first=$round
    while :; do
        merge_id=$(sbatch --parsable "${extra[@]}" --wait --job-name=qkd-audit-merge \
            --dependency="afterok:$array_id" --kill-on-invalid-dep=yes \
            --output="$dir/merge-round-$round.out" --error="$dir/merge-round-$round.err" --wrap="$merge") && status=0 || status=$?
        merge_id=${merge_id%%;*}
        merged=$(merged_rounds)
        if ((status > 1)) || [[ ${merged:-0} != "$round" ]]; then
            echo "round $round did not merge (merge job $merge_id, status $status); shard logs: $dir/slurm-${array_id}_*.out" >&2
            cat "$dir/merge-round-$round.err" >&2 2>/dev/null || true
            exit 2
        fi
        if grep -q '^finished = true' "$state"; then
            echo "the search finished after $round round(s); evidence in $output" >&2
            cat "$dir/merge-round-$round.out"
            exit "$status"
        fi
        if ((round - first + 1 >= max_rounds)); then
            echo "stopped after MAX_ROUNDS=$max_rounds rounds; the state in $dir is kept: run this script again with SHARD_DIR=$dir to go on" >&2
            exit 2
        fi
        round=$((round + 1))
        array_id=$(sbatch --parsable "${extra[@]}" --job-name=qkd-audit-shard --array="1-$n" \
            --output="$dir/slurm-%A_%a.out" \
            --wrap="$job --shard \${SLURM_ARRAY_TASK_ID}/$n --shard-dir $(printf '%q' "$dir") --force")
        array_id=${array_id%%;*}
        echo "round $round: submitted array job $array_id" >&2
    done
fi
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
