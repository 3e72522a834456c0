#!/bin/sh
# Test estimator: sleeps far past any sensible time limit (it must be
# recorded as a timeout, and killed with its child process).
sleep 300
echo '{"speed_mps": 1540}'
