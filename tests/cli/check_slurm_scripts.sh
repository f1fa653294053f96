#!/usr/bin/env bash
# The Slurm example scripts, run without Slurm: shard.sbatch as the three
# tasks of an array (SLURM_ARRAY_TASK_ID set by hand, as Slurm sets it), then
# merge.sbatch; the merged tables must equal a single run's. submit is run
# against a stand-in sbatch that records its arguments: the array covers 1-N
# and the merge depends on it with afterok.
# Usage: check_slurm_scripts.sh COVERGRID SCRIPTS_DIR WORK_DIR
set -euo pipefail
export COVERGRID=$1
scripts=$2 work=$3
rm -rf "$work"
mkdir -p "$work/single" "$work/array" "$work/bin"
cat >"$work/s.toml" <<'TOML'
title = "slurm scripts"
[grid]
n = { from = 1, to = 12 }
p = { from = 0.001, to = 0.999, count = 2100 }
levels = 0.95
[[method]]
id = "wilson"
[[method]]
id = "jeffreys"
[output]
cube = "s.h5"
tables = "s"
TOML
cp "$work/s.toml" "$work/single/"
cp "$work/s.toml" "$work/array/"
"$COVERGRID" run "$work/single/s.toml" --quiet >/dev/null

cd "$work/array"
for k in 1 2 3; do
  SLURM_ARRAY_TASK_ID=$k SLURM_CPUS_PER_TASK=1 "$scripts/shard.sbatch" s.toml 3 >/dev/null 2>&1
done
ls s.shard-1-of-3.h5 s.shard-2-of-3.h5 s.shard-3-of-3.h5 >/dev/null
"$scripts/merge.sbatch" s.h5 3 >/dev/null 2>&1
cmp s-summary.csv ../single/s-summary.csv
cmp s-ranking.csv ../single/s-ranking.csv

# Outside an array the shard script refuses (exit 2).
status=0
"$scripts/shard.sbatch" s.toml 3 2>/dev/null || status=$?
[ "$status" = 2 ] || { echo "shard.sbatch outside an array: exit $status, expected 2" >&2; exit 1; }
# With a shard missing, the merge refuses and writes nothing.
rm -f s.h5 s.shard-2-of-3.h5
status=0
"$scripts/merge.sbatch" s.h5 3 2>/dev/null || status=$?
[ "$status" = 2 ] && [ ! -e s.h5 ] || { echo "merge with a missing shard: exit $status" >&2; exit 1; }

# submit, against a stand-in sbatch.
cat >"$work/bin/sbatch" <<'SH'
#!/bin/bash
echo "$*" >>"$SBATCH_LOG"
n=$(wc -l <"$SBATCH_LOG")
echo "$((4000 + n));cluster"
SH
chmod +x "$work/bin/sbatch"
export SBATCH_LOG=$work/sbatch.log
out=$(PATH="$work/bin:$PATH" "$scripts/submit" s.toml 3 --partition=short)
grep -q "^--parsable --array=1-3 --partition=short $scripts/shard.sbatch s.toml 3\$" "$SBATCH_LOG"
grep -q "^--parsable --dependency=afterok:4001 $scripts/merge.sbatch s.h5 3\$" "$SBATCH_LOG"
echo "$out" | grep -q "shards: job array 4001 (tasks 1-3); merge: job 4002 into s.h5"
# A bad N is refused before anything is queued.
status=0
PATH="$work/bin:$PATH" "$scripts/submit" s.toml 999 >/dev/null 2>&1 || status=$?
[ "$status" = 2 ] && [ "$(wc -l <"$SBATCH_LOG")" = 2 ] || { echo "submit with N too large: exit $status" >&2; exit 1; }
echo "slurm scripts: ok"
