#!/usr/bin/env bash
# The whole job on the bundled demo project (invented park rangers' reports of wildlife encounters).
# Usage: scripts/demo.sh PATH/TO/coderel OUTPUT_DIR
set -euo pipefail
CODEREL=${1:-coderel}
OUT=${2:-demo-output}
CB=sample_codebooks/wildlife_encounters.yaml
SHEETS=demo/sheets
DECISIONS=sample_decisions/wildlife_encounters.xlsx
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

step "3. Blank coding workbooks for a new round (dropdowns of code = label, number limits)"
"$CODEREL" template --codebook "$CB" --coders ana,ben,cai --units demo/units.txt -o "$OUT/templates" --overwrite

step "4. Agreement per variable with 2,000-replicate bootstrap intervals"
"$CODEREL" agree --codebook "$CB" "$SHEETS" --out "$OUT/agreement.csv"

step "5. The adjudication list: one row per cell where the coders disagree"
"$CODEREL" adjudicate --codebook "$CB" "$SHEETS" -o "$OUT/adjudication.xlsx"

step "6. The reconciled dataset, with the demo's decisions (sample_decisions/)"
"$CODEREL" merge --codebook "$CB" "$SHEETS" --decisions "$DECISIONS" --strict -o "$OUT/merged.xlsx"

step "7. Stability: coder_ana recoded 40 reports two weeks later (test-retest)"
"$CODEREL" stability --codebook "$CB" "$SHEETS" --occasion coder_ana=demo/retest/coder_ana.csv --out "$OUT/stability.csv"

step "8. The reliability report (with the Stability section)"
# the report's paths go to stderr with the rest of the log: stdout ends with report.html, once
"$CODEREL" report --codebook "$CB" "$SHEETS" --decisions "$DECISIONS" --occasion coder_ana=demo/retest/coder_ana.csv -o "$OUT/report.html" --format html,md,xlsx >&2

cat >&2 <<MSG

Demo finished. Outputs in $OUT/:
  messy-problems.csv        every problem of the messy sheet, with file, sheet and cell
  templates/                one blank coding workbook per coder
  agreement.csv             coefficients with intervals, one row per variable and coefficient
  adjudication.xlsx         one row per disagreement, for the adjudicator ("to decide" sheet)
  merged.xlsx               one row per unit: final value and status per variable (+ audit log)
  stability.csv             each coder against their own recoding, per variable and coefficient
  report.html, report.md, report.xlsx   the reliability report
MSG
printf '%s\n' "$OUT/report.html"
