#!/usr/bin/env bash
# make check-discovery: does framelaw find the laws of its own demo scenarios? For each scenario,
# render the recordings once, train the quick config with several seeds, and check each run with
# `framelaw verify` (coordinate-free properties: periods and damping of the lantern, the largest
# Lyapunov exponent and boundedness of the convection cell). Passes when, for each scenario, at
# least its MIN_PASS_<SCENARIO> seeds pass every check.
#   SEEDS                seeds to train                          [1 2 3]
#   MIN_PASS             seeds that must pass, any scenario      [1]
#   MIN_PASS_LANTERN     the same for the lantern                [MIN_PASS]
#   MIN_PASS_CONVECTION  the same for the convection cell        [MIN_PASS]
#   SCENARIOS            which scenarios                         [lantern convection]
set -u
FRAMELAW=${FRAMELAW:-./framelaw}
SEEDS=${SEEDS:-1 2 3}
MIN_PASS=${MIN_PASS:-1}
SCENARIOS=${SCENARIOS:-lantern convection}
work=$(mktemp -d "${TMPDIR:-/tmp}/framelaw-discovery-XXXXXX")
trap 'rm -rf "$work"' EXIT
status=0
for sc in $SCENARIOS; do
  case $sc in
    lantern) render=(--recordings 8 --frames 200 --noise 0.005) ;;
    convection) render=(--recordings 6 --frames 600) ;;
    *) echo "check-discovery: unknown scenario $sc"; exit 2 ;;
  esac
  "$FRAMELAW" demo "$sc" "$work/$sc-data" "${render[@]}" >/dev/null || exit 1
  pass=0; n=0; start=$(date +%s)
  for seed in $SEEDS; do
    n=$((n + 1))
    run="$work/$sc-run-$seed"
    if "$FRAMELAW" train "configs/$sc-quick.json" --quiet --set data.frames="$work/$sc-data" \
         --set train.seed="$seed" --set output="$run" >/dev/null 2>"$run.err"; then
      if "$FRAMELAW" verify "$run" > "$run.verify"; then pass=$((pass + 1)); fi
      echo "$sc seed $seed: $(tail -n 1 "$run.verify")"
      sed -n '1,/^verify/p' "$run.verify" | grep -v '^verify' | sed 's/^/  /'
    else
      echo "$sc seed $seed: training failed: $(tail -n 1 "$run.err")"
    fi
  done
  case $sc in lantern) need=${MIN_PASS_LANTERN:-$MIN_PASS} ;; convection) need=${MIN_PASS_CONVECTION:-$MIN_PASS} ;; esac
  echo "check-discovery: $sc: $pass of $n seeds pass every check, $need required ($(( $(date +%s) - start )) s)"
  [ "$pass" -ge "$need" ] || status=1
done
exit $status
