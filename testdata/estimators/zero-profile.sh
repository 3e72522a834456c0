#!/bin/sh
# Test estimator: answers a profile of zeros, one per element (no correction),
# so its profile error is exactly the true screen's rms (fraction 1).
# It reads the element count from the manifest written by celerity
# ("linear: {count: N, ...}"); a sketch, not a YAML reader.
n=$(sed -n 's/.*count: *\([0-9][0-9]*\).*/\1/p' "$1/acquisition.yaml" | head -n 1)
test -n "$n" || { echo "no element count in $1/acquisition.yaml" >&2; exit 2; }
printf '{"profile_s": ['
i=0
while [ "$i" -lt "$n" ]; do
  if [ "$i" -gt 0 ]; then printf ', '; fi
  printf '0'
  i=$((i + 1))
done
printf ']}\n'
