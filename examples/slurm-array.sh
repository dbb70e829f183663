#!/bin/bash
# cohortpress as a Slurm job array: each array task runs one shard of the monthly run; a second
# job, started when every task has succeeded, merges the shards into the complete output.
#
# Submit both from a login node (PROGRAM, PERIOD and AS_OF are fixed once, at submission, so
# every shard computes the same run even if the tasks start on different days):
#
#   export PROGRAM=/shared/wellness/steady-ground PERIOD=2027-04 AS_OF=2027-05-02
#   export RUNS=/shared/wellness/runs
#   array=$(sbatch --parsable --export=ALL examples/slurm-array.sh)
#   sbatch --dependency=afterok:"$array" --export=ALL,MERGE=1 --array=1 examples/slurm-array.sh
#
# The same script is the merge job when MERGE=1 (an "array" of one task). Shards and merge
# print JSON log lines to the task's log file; the exit codes are the documented ones (README
# "Exit codes").
#
#SBATCH --job-name=cohortpress
#SBATCH --array=1-8
#SBATCH --cpus-per-task=4
#SBATCH --mem=4G
#SBATCH --time=02:00:00
#SBATCH --output=cohortpress-%A_%a.log

set -euo pipefail

: "${PROGRAM:?set PROGRAM to the program folder}"
: "${PERIOD:?set PERIOD to the reporting month, e.g. 2027-04}"
: "${AS_OF:?set AS_OF to the as-of date, e.g. 2027-05-02}"
: "${RUNS:?set RUNS to a folder on the shared file system}"
SHARDS=8 # must match --array=1-8 above

work="$RUNS/$PERIOD"
mkdir -p "$work"
chmod 700 "$work" # the reports hold health data

if [[ "${MERGE:-0}" == 1 ]]; then
    shard_dirs=()
    for k in $(seq 1 "$SHARDS"); do
        shard_dirs+=("$work/shard-$k-of-$SHARDS")
    done
    set +e
    cohortpress merge "$PROGRAM" --out "$work/reports" --log-format json "${shard_dirs[@]}"
    rc=$?
    set -e
else
    k="${SLURM_ARRAY_TASK_ID:?not running as an array task}"
    set +e
    cohortpress run "$PROGRAM" --period "$PERIOD" --as-of "$AS_OF" \
        --shard "$k/$SHARDS" --out "$work/shard-$k-of-$SHARDS" \
        --jobs "${SLURM_CPUS_PER_TASK:-1}" --log-format json
    rc=$?
    set -e
fi

# 1 (input warnings), 4 (participants left out) and 5 (a module failed for some participants)
# are complete runs whose findings are in the log and in metrics/data-quality.csv: let the
# merge go ahead. Anything else (2 usage, 3 invalid program, 6 output failed, 7 locked,
# 70 internal error) fails the task, and `afterok` then holds the merge back.
case "$rc" in
0 | 1 | 4 | 5) exit 0 ;;
*) exit "$rc" ;;
esac
