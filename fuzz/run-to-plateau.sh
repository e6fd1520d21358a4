#!/usr/bin/env bash
# Fuzzes one target until its coverage stops growing: libFuzzer's "cov:" has not risen for
# PLATEAU seconds (default 300), or CAP seconds have passed (default 1200). One job and one
# worker at the lowest priority, starting from (and adding to) corpus/TARGET. The worker's
# output goes to logs/TARGET.log; the last line of logs/TARGET.summary says how it ended.
#
#   fuzz/run-to-plateau.sh TARGET [MAX_LEN]
#
# TOOLCHAIN picks the compiler (default "+nightly"; set it to "" and RUSTC_BOOTSTRAP=1 to
# fuzz with the stable compiler).
set -euo pipefail

target=${1:?usage: run-to-plateau.sh TARGET [MAX_LEN]}
max_len=${2:-4096}
plateau=${PLATEAU:-300}
cap=${CAP:-1200}
toolchain=${TOOLCHAIN-+nightly}

cd "$(dirname "$0")"
mkdir -p logs
log=logs/$target.log
summary=logs/$target.summary
rm -f "$log" fuzz-0.log

echo "$(date -u +%FT%TZ) $target: max_len $max_len, plateau ${plateau}s, cap ${cap}s," \
    "corpus $(ls corpus/"$target" | wc -l) files" >"$summary"

# Its own process group, so the whole run (cargo, the job runner, the worker) can be ended
# together once the plateau is reached.
setsid nice -n 19 cargo $toolchain fuzz run "$target" "corpus/$target" -- \
    -jobs=1 -workers=1 -max_len="$max_len" -max_total_time="$cap" \
    -print_final_stats=1 >"logs/$target.driver.log" 2>&1 &
group=$!

start=$(date +%s)
last_cov=-1
last_rise=$start
ended=cap
while kill -0 "$group" 2>/dev/null; do
    sleep 5
    # libFuzzer's jobs mode writes the worker's output to fuzz-0.log in the working folder.
    [ -f fuzz-0.log ] || continue
    # Empty until the worker has loaded its corpus and printed a first status line.
    cov=$(grep -o 'cov: [0-9]*' fuzz-0.log | tail -1 | cut -d' ' -f2 || true)
    [ -n "$cov" ] || continue
    now=$(date +%s)
    if [ "$cov" -gt "$last_cov" ]; then
        last_cov=$cov
        last_rise=$now
    fi
    if [ $((now - last_rise)) -ge "$plateau" ]; then
        ended=plateau
        # SIGINT makes the worker print its final statistics before it exits.
        kill -INT -- -"$group" 2>/dev/null || true
        break
    fi
done
wait "$group" || true
end=$(date +%s)
cp fuzz-0.log "$log" 2>/dev/null || true

last=$(grep -E '^#[0-9]+' "$log" | tail -1 || true)
execs=$(grep -o 'stat::number_of_executed_units: [0-9]*' "$log" | tail -1 | cut -d' ' -f2 || true)
crashes=$(ls "artifacts/$target" 2>/dev/null | wc -l)
{
    echo "ended by $ended after $((end - start)) s; last cov rise at $((last_rise - start)) s"
    echo "last status: $last"
    echo "executions: ${execs:-unknown}; artifacts: $crashes"
} >>"$summary"
cat "$summary"
