#!/usr/bin/env bash
# make check-battery: how often does framelaw find the laws of systems it was never tuned for? For
# each scenario of the battery (docs/battery.md), render the recordings once, train the scenario's
# template config (configs/battery/<scenario>.json: data.frames, data.fps, model.latent,
# model.order, and nothing else) over several seeds, and check each run with `framelaw verify`.
# Prints a table (scenario, seeds passing every check, seconds per seed; and the seeds whose
# canonical law, `framelaw verify --law canonical`, passes every check, reported only) and, for every
# seed that fails, what verify measured; per seed, the law and how many ensemble members chose it.
# Passes when each scenario has at least its required count.
#   SEEDS          seeds to train                                        [1 2 3 4 5]
#   SCENARIOS      which scenarios             [spring colony pulse puck lantern convection]
#   BATTERY_SET    extra --set KEY=VALUE overrides for every run, space separated      []
#   MIN_PASS       seeds that must pass, every scenario                              [0]
#   MIN_PASS_<SCENARIO, upper case>  the same for one scenario                 [MIN_PASS]
#   RENDER_<SCENARIO, upper case>    extra `framelaw demo` options for one scenario   []
#   KEEP           a folder to keep the data and runs in (default: a temporary one)
set -u
FRAMELAW=${FRAMELAW:-./framelaw}
SEEDS=${SEEDS:-1 2 3 4 5}
SCENARIOS=${SCENARIOS:-spring colony pulse puck lantern convection}
MIN_PASS=${MIN_PASS:-0}
BATTERY_SET=${BATTERY_SET:-}
if [ -n "${KEEP:-}" ]; then work=$KEEP; mkdir -p "$work"; else
  work=$(mktemp -d "${TMPDIR:-/tmp}/framelaw-battery-XXXXXX"); trap 'rm -rf "$work"' EXIT; fi
sets=()
for kv in $BATTERY_SET; do sets+=(--set "$kv"); done
status=0
table="scenario      pass  of  required  s/seed  canonical"
for sc in $SCENARIOS; do
  up=$(echo "$sc" | tr a-z A-Z)
  render_var="RENDER_$up"; render=${!render_var:-}
  case $sc in
    lantern) render=${render:---recordings 8 --frames 200 --noise 0.005} ;;
    convection) render=${render:---recordings 6 --frames 600} ;;
  esac
  # shellcheck disable=SC2086
  "$FRAMELAW" demo "$sc" "$work/$sc-data" --overwrite $render >/dev/null || exit 1
  pass=0; cpass=0; n=0; start=$(date +%s)
  for seed in $SEEDS; do
    n=$((n + 1))
    run="$work/$sc-run-$seed"
    rm -rf "$run"
    if "$FRAMELAW" train "configs/battery/$sc.json" --quiet --set data.frames="$work/$sc-data" \
         --set train.seed="$seed" --set output="$run" "${sets[@]}" >"$run.out" 2>&1; then
      if "$FRAMELAW" verify "$run" > "$run.verify" 2>&1; then
        pass=$((pass + 1))
        echo "$sc seed $seed: $(tail -n 1 "$run.verify")"
      else
        echo "$sc seed $seed: $(tail -n 1 "$run.verify")"
        grep -v '^verify' "$run.verify" | sed 's/^/  /'
      fi
      grep -A1 '^learned equations' "$run.out" | tail -n 1 | sed 's/^/  law: /'
      chose=$(grep -o '"chose_trained_law":[[:space:]]*[0-9]*' "$run/equations.json" | grep -o '[0-9]*$')
      members=$(grep -o '"members":[[:space:]]*[0-9]*' "$run/equations.json" | head -n 1 | grep -o '[0-9]*$')
      [ -n "$chose" ] && echo "  ensemble: $chose of $members members chose the trained law"
      if "$FRAMELAW" verify --law canonical "$run" > "$run.verify-canonical" 2>&1; then cpass=$((cpass + 1)); fi
      echo "  canonical: $(grep '^law:' "$run.verify-canonical" | cut -c6-); $(tail -n 1 "$run.verify-canonical")"
    else
      echo "$sc seed $seed: training failed: $(tail -n 1 "$run.out")"
    fi
  done
  secs=$(( ($(date +%s) - start) / (n > 0 ? n : 1) )) # training and both verifies
  need_var="MIN_PASS_$up"; need=${!need_var:-$MIN_PASS}
  table="$table
$(printf '%-12s %5d %3d %9d %7d %10d' "$sc" "$pass" "$n" "$need" "$secs" "$cpass")"
  [ "$pass" -ge "$need" ] || status=1
done
echo
echo "check-battery: seeds $SEEDS${BATTERY_SET:+, with $BATTERY_SET}"
echo "$table"
exit $status
