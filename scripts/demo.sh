#!/usr/bin/env bash
# The whole job on the bundled demo project; outputs go to the folder given as $2.
set -uo pipefail
CODEREL=${1:-coderel}
OUT=${2:-demo-output}
mkdir -p "$OUT"
"$CODEREL" --help
