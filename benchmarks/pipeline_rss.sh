#!/usr/bin/env bash
# Peak resident memory of `bitmend encode | bitmend decode` on a large random stream.
#   bash benchmarks/pipeline_rss.sh [MiB]   (default 1024)
# Prints each process's maximum RSS (GNU time) and the wall time; checks the output.
set -euo pipefail
mib=${1:-1024}
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
start=$(date +%s.%N)
head -c "$((mib << 20))" /dev/urandom | tee >(sha256sum > "$tmp/in.sha") \
  | /usr/bin/time -f "encode: max RSS %M KiB, %e s" -o "$tmp/enc.time" bitmend encode \
  | /usr/bin/time -f "decode: max RSS %M KiB, %e s" -o "$tmp/dec.time" bitmend decode --quiet \
  | sha256sum > "$tmp/out.sha"
end=$(date +%s.%N)
sleep 1  # let the tee'd checksum finish
cat "$tmp/enc.time" "$tmp/dec.time"
echo "wall: $(echo "$end - $start" | bc) s for $mib MiB"
if cmp -s "$tmp/in.sha" "$tmp/out.sha"; then echo "output identical to input"; else echo "OUTPUT DIFFERS"; exit 1; fi
