#!/bin/sh
# Test estimator: answers the same speed and interval whatever it is given.
# Usage: const-speed.sh ACQUISITION_FOLDER
# The benchmark's scoring test runs it on cases whose true speed is 1540 m/s
# minus an offset, so the bias it is scored with must be that offset exactly.
test -f "$1/acquisition.yaml" || { echo "no acquisition.yaml in $1" >&2; exit 2; }
echo '{"speed_mps": 1540, "ci95_mps": [1530, 1550], "confidence": "high"}'
