#!/bin/sh
# Runs each built fuzz target in turn for SECONDS (default 600) at the lowest priority, one at a
# time, logging to fuzz/logs/TARGET.log. A target that finds a crash stops early; its
# input is left in fuzz/artifacts/TARGET/.
set -u
cd "$(dirname "$0")"
secs=${SECONDS_PER_TARGET:-600}
mkdir -p logs
for t in ${TARGETS:-predicate hex npy csv job_plan check_dump check_golden}; do
    mkdir -p corpus/$t artifacts/$t
    # The binaries of the last `cargo +nightly fuzz build -O`: editing the library while
    # the targets run does not rebuild them.
    nice -n 19 target/x86_64-unknown-linux-gnu/release/$t corpus/$t \
        -artifact_prefix=artifacts/$t/ -max_total_time=$secs -timeout=10 -rss_limit_mb=1024 -print_final_stats=1 \
        > logs/$t.log 2>&1
    echo "$t exit $?" >> logs/summary.txt
done
