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

step "1. Plan the reliability sample from a pilot (40 reports coded by two coders)"
"$CODEREL" plan --codebook "$CB" --pilot demo/pilot --replicates 1000 --out "$OUT/plan.xlsx" >&2

step "2. Every category with a share of 10% or more must show up: the size for that (JSON for draw)"
"$CODEREL" plan --codebook "$CB" --smallest-share 0.1 --json > "$OUT/plan.json"

step "3. Draw the reliability sample from next season's 1,200 reports, stratified by district"
"$CODEREL" draw demo/corpus.csv --codebook "$CB" --plan "$OUT/plan.json" --strata district \
  --min-per-stratum 20 --seed 20261202 -o "$OUT/reliability.txt" >&2

step "4. Assign: every coder codes the reliability sample (blended in), the rest once; one workbook each"
"$CODEREL" assign demo/corpus.csv --codebook "$CB" --reliability "$OUT/reliability.txt" \
  --coders ana,ben,cai --seed 20261202 --blend -o "$OUT/assignment" \
  --templates "$OUT/assignment/workbooks" --overwrite >&2

step "5. Validate the three coders' sheets of the last round against the codebook"
"$CODEREL" validate --codebook "$CB" "$SHEETS"

step "6. Validate a deliberately messy fourth sheet (problems expected; exit code 1)"
set +e
"$CODEREL" validate --codebook "$CB" demo/messy --out "$OUT/messy-problems.csv"
rc=$?
set -e
if [ "$rc" -ne 1 ]; then echo "expected exit code 1 for the messy sheet, got $rc" >&2; exit 1; fi

step "7. Blank coding workbooks for a new round (dropdowns of code = label, number limits)"
"$CODEREL" template --codebook "$CB" --coders ana,ben,cai --units demo/units.txt -o "$OUT/templates" --overwrite

step "8. Agreement per variable with 2,000-replicate bootstrap intervals"
"$CODEREL" agree --codebook "$CB" "$SHEETS" --out "$OUT/agreement.csv"

step "9. The adjudication list: one row per cell where the coders disagree"
"$CODEREL" adjudicate --codebook "$CB" "$SHEETS" -o "$OUT/adjudication.xlsx"

step "10. The reconciled dataset, with the demo's decisions (sample_decisions/)"
"$CODEREL" merge --codebook "$CB" "$SHEETS" --decisions "$DECISIONS" --strict -o "$OUT/merged.xlsx"

step "11. Stability: coder_ana recoded 40 reports two weeks later (test-retest)"
"$CODEREL" stability --codebook "$CB" "$SHEETS" --occasion coder_ana=demo/retest/coder_ana.csv --out "$OUT/stability.csv"

step "12. The reliability report (with the Stability section)"
# the report's paths go to stderr with the rest of the log: stdout ends with report.html, once
"$CODEREL" report --codebook "$CB" "$SHEETS" --decisions "$DECISIONS" --occasion coder_ana=demo/retest/coder_ana.csv -o "$OUT/report.html" --format html,md,xlsx >&2

CB11=sample_codebooks/wildlife_encounters_v1.1.yaml
ROUNDS=demo/rounds

step "13. Training: would merging behaviour 4 and 5 help the pilot? (a what-if, codebook 1.0)"
"$CODEREL" agree --codebook "$CB" "$ROUNDS/pilot" --collapse behaviour=4+5 --out "$OUT/pilot-what-if.xlsx"

step "14. What changed from codebook 1.0 to 1.1 (4 and 5 merged, a training threshold)"
"$CODEREL" codebook diff "$CB" "$CB11"

step "15. Each trainee of the second training round against the answer key; feedback workbooks"
"$CODEREL" score --codebook "$CB11" --key demo/keys/training-2.xlsx "$ROUNDS/training-2" -o "$OUT/feedback"

step "16. Alpha per round, the pilot's 1.0 sheets recoded to 1.1 when read; coder drift"
"$CODEREL" trend --codebook "$CB11" --round pilot="$ROUNDS/pilot" \
  --round training-1="$ROUNDS/training-1" --round training-2="$ROUNDS/training-2" --out "$OUT/trend.xlsx"

cat >&2 <<MSG

Demo finished. Outputs in $OUT/:
  plan.xlsx, plan.json      reliability sample size per variable (pilot-based and for p_c = 0.1)
  reliability.txt           the drawn reliability sample, with reliability.manifest.json
  assignment/               one unit list per coder, the design's manifest, workbooks/ per coder
  messy-problems.csv        every problem of the messy sheet, with file, sheet and cell
  templates/                one blank coding workbook per coder
  agreement.csv             coefficients with intervals, one row per variable and coefficient
  adjudication.xlsx         one row per disagreement, for the adjudicator ("to decide" sheet)
  merged.xlsx               one row per unit: final value and status per variable (+ audit log)
  stability.csv             each coder against their own recoding, per variable and coefficient
  report.html, report.md, report.xlsx   the reliability report
  pilot-what-if.xlsx        the pilot's agreement with behaviour 4 and 5 merged (a what-if)
  feedback/                 one workbook per trainee: every difference from the answer key
  trend.xlsx                alpha per round and variable; each coder's agreement by round
MSG
printf '%s\n' "$OUT/report.html"
