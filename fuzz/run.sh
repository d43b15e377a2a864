#!/usr/bin/env bash
# Runs each fuzz target for a bounded time (default 60 s each; FUZZ_SECONDS=600 for the long
# run), seeded from the templates, the demo folder and the bad-input corpus. Needs cargo-fuzz
# (`cargo install cargo-fuzz`); on a stable toolchain RUSTC_BOOTSTRAP=1 lets it use the
# sanitizer flags, and `--sanitizer none` keeps the run fast. Crashes land in
# fuzz/artifacts/<target>/; keep each one as a regression file under tests/bad/ with a test.
set -euo pipefail
cd "$(dirname "$0")"
seconds="${FUZZ_SECONDS:-60}"
targets=("${@:-read_workbook read_csv}")
export RUSTC_BOOTSTRAP=1

mkdir -p corpus/read_workbook corpus/read_csv
for f in ../templates/*.xlsx ../inbox-demo/*.xlsx ../tests/bad/*.xlsx; do
    cp -n "$f" corpus/read_workbook/ 2>/dev/null || true
done
for f in ../tests/bad/*.csv; do
    cp -n "$f" corpus/read_csv/ 2>/dev/null || true
done
if [ -d seeds ]; then
    cp -n seeds/*.csv corpus/read_csv/ 2>/dev/null || true
    cp -n seeds/*.ods seeds/*.xls corpus/read_workbook/ 2>/dev/null || true
fi

for target in ${targets[*]}; do
    echo "== $target for ${seconds} s"
    # The memory limits mirror the program's own: a single allocation over 512 MB is a finding.
    cargo fuzz run --release --sanitizer none "$target" "corpus/$target" -- \
        -max_total_time="$seconds" -rss_limit_mb=2048 -malloc_limit_mb=512 \
        -max_len=262144 -timeout=20 -print_final_stats=1
done
