#!/bin/sh
# Fills fuzz/corpus/TARGET/ with starting inputs taken from the repository's own jobs,
# tables and a small run's images. The corpus is generated, never committed.
set -eu
cd "$(dirname "$0")/.."
c=fuzz/corpus
mkdir -p $c/predicate $c/job_plan $c/hex $c/npy $c/csv $c/check_dump $c/check_golden
i=0
for p in 'v < 3' 'a between 1 and 9 and not (b in (1, 2, -3))' 'f32 >= 1.5e3 or i64 != -9' \
    'u4 = 15 and u1 in (0, 1)' 'key between 200 and 100' '(u8 > 3 and u8 < 2) or f64 <= -0.0'; do
    printf '%s' "$p" > $c/predicate/seed$i; i=$((i + 1))
done
for j in data/jobs/*.toml; do
    # Shrink the examples so they stay under the fuzzing entry's row limit.
    sed -e "s/^rows = [0-9]\{5,\}/rows = 2000/" -e 's/^turbines = .*/turbines = 4/' "$j" > $c/job_plan/$(basename "$j")
done
cp data/tables/turbines.csv $c/csv/
printf 'a:i16,b:f32,c:u2\n-3,1.5,2\n,nan,0\n' > $c/csv/typed.csv
tmp=$(mktemp -d)
cargo run -q --bin weir -- run data/jobs/scan-testbench.toml --out "$tmp/run" > /dev/null
for f in $(find "$tmp/run" -name '*.hex' | head -8); do
    { printf '\006'; cat "$f"; } > $c/hex/$(basename "$f")
done
find "$tmp/run" -name '*.npy' | head -8 | xargs -I{} cp {} $c/npy/
for f in $(find "$tmp/run/golden" -type f | head -6); do
    { printf '\000'; cat "$f"; } > $c/check_dump/$(basename "$f")
    { printf '\000'; cat "$f"; } > $c/check_golden/$(basename "$f")
done
{ printf '\377'; cat "$tmp/run/manifest.json"; } > $c/check_golden/manifest.json
rm -rf "$tmp"
