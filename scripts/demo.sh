#!/usr/bin/env bash
# The whole job on the bundled demo project (invented park rangers' reports of wildlife encounters).
# Usage: scripts/demo.sh PATH/TO/coderel OUTPUT_DIR
set -euo pipefail
CODEREL=${1:-coderel}
OUT=${2:-demo-output}
CB=sample_codebooks/wildlife_encounters.yaml
SHEETS=demo/sheets
mkdir -p "$OUT"
export NO_COLOR=${NO_COLOR:-}

step() { printf '\n==> %s\n' "$*" >&2; }

step "1. Validate the three coders' sheets against the codebook"
"$CODEREL" validate --codebook "$CB" "$SHEETS"

step "2. Validate a deliberately messy fourth sheet (problems expected; exit code 1)"
set +e
"$CODEREL" validate --codebook "$CB" demo/messy --out "$OUT/messy-problems.csv"
rc=$?
set -e
if [ "$rc" -ne 1 ]; then echo "expected exit code 1 for the messy sheet, got $rc" >&2; exit 1; fi

step "3. Agreement per variable with 2,000-replicate bootstrap intervals"
"$CODEREL" agree --codebook "$CB" "$SHEETS" --out "$OUT/agreement.csv"

cat >&2 <<MSG

Demo finished. Outputs in $OUT/:
  messy-problems.csv   every problem of the messy sheet, with file, sheet and cell
  agreement.csv        coefficients with intervals, one row per variable and coefficient
MSG
