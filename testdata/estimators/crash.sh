#!/bin/sh
# Test estimator: fails with a message on stderr and exit status 3.
echo "estimator: cannot read channels.npy" >&2
exit 3
