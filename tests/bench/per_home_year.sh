#!/usr/bin/env bash
# The README's per-home-year and fleet figures ("Benchmark"): run from the
# repository root after `cargo build --release`, on a quiet machine:
#   bash tests/bench/per_home_year.sh .
set -euo pipefail
cd "$1"
B=$PWD/target/release/loadloom
T=/tmp/measure; rm -rf $T; mkdir -p $T
echo "commit $(git rev-parse --short HEAD) $(date -u) load: $(cut -d' ' -f1-3 /proc/loadavg)"
/usr/bin/time -f "year1s %e wall %U user %S sys %M KB" $B run scenarios/split-phase-house.toml --length 365d --out $T/y1s --quiet
echo "year1s bytes $(du -sb $T/y1s | cut -f1)"; rm -rf $T/y1s
sed 's/^interval = "1 s"/interval = "1 min"/' scenarios/split-phase-house.toml > $T/house-1min.toml
grep -n '^interval' $T/house-1min.toml
cp -r scenarios/library $T/ 2>/dev/null || true
/usr/bin/time -f "year1min %e wall %U user %S sys %M KB" $B run $T/house-1min.toml --length 365d --out $T/y1m --quiet
echo "year1min bytes $(du -sb $T/y1m | cut -f1)"; rm -rf $T/y1m
sed 's/^length = "1 d"/length = "30 d"/' scenarios/fleet/mixed-street.toml > scenarios/fleet/_measure.toml
for j in 1 2; do
  /usr/bin/time -f "fleet16x30d jobs=$j %e wall %U user %S sys %M KB" $B fleet scenarios/fleet/_measure.toml --homes 16 --jobs $j --out $T/f$j > /dev/null
  rm -rf $T/f$j
done
sed -e 's/^length = "1 d"/length = "3 d"/' -e 's/^interval = "1 min"/interval = "1 s"/' scenarios/fleet/mixed-street.toml > scenarios/fleet/_measure.toml
grep -n '^length\|^interval' scenarios/fleet/_measure.toml
for j in 1 2; do
  /usr/bin/time -f "fleet8x3d1s jobs=$j %e wall %U user %S sys %M KB" $B fleet scenarios/fleet/_measure.toml --homes 8 --jobs $j --out $T/g$j > /dev/null
  rm -rf $T/g$j
done
rm -f scenarios/fleet/_measure.toml
echo "load after: $(cut -d' ' -f1-3 /proc/loadavg)"
