#!/usr/bin/env bash
# make check-report-browser: the report of a real run, read back by a real browser. Renders a tiny
# lantern scene (3 recordings of 60 frames at 20 px), trains a tiny second-order model on it with
# derivatives in latent space (40 epochs, one thread: seconds), writes its report, and has headless
# Chromium (Debian package `chromium`) load the page and dump the DOM it built. The DOM must hold
# the laws as MathML (<math> elements with <mfrac> derivatives), the LaTeX source only inside the
# copy boxes (<textarea>), and no x'' term in the loss plot's legend (model.derivatives latent).
# Installs chromium when it is missing and this runs as root (as `make deps` does); prints the
# seconds each part took.
#   KEEP   a folder to keep the data, the run and the DOM in (default: a temporary one)
set -euo pipefail
FRAMELAW=${FRAMELAW:-./framelaw}
t0=$(date +%s)
if ! command -v chromium >/dev/null 2>&1; then
  if [ "$(id -u)" = 0 ]; then
    echo "check-report-browser: installing chromium (Debian package)"
    (apt-get update -qq || true) && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq --no-install-recommends chromium >/dev/null
  else
    echo "check-report-browser: needs headless Chromium: sudo apt-get install -y --no-install-recommends chromium" >&2
    exit 1
  fi
fi
t1=$(date +%s)
if [ -n "${KEEP:-}" ]; then work=$KEEP; mkdir -p "$work"; else
  work=$(mktemp -d "${TMPDIR:-/tmp}/framelaw-browser-XXXXXX"); trap 'rm -rf "$work"' EXIT; fi
work=$(cd "$work" && pwd)
"$FRAMELAW" demo lantern "$work/data" --size 20 --recordings 3 --frames 60 --noise 0.01 --overwrite >/dev/null 2>&1
cat >"$work/config.json" <<CFG
{"data": {"frames": "$work/data", "fps": 30, "validation": {"last": 1}},
 "model": {"latent": 1, "order": 2, "encoder": [16, 8], "derivatives": "latent", "init_epochs": 20},
 "library": {"degree": 3, "trig": true},
 "train": {"epochs": 40, "batch": 64, "threads": 1, "validate_every": 10, "warmup_epochs": 0},
 "threshold": {"value": 0.002, "measure": "coefficient", "select": "none", "every": 10, "refine_epochs": 10},
 "checkpoint": {"every": 20, "keep": 2},
 "output": "$work/run"}
CFG
rm -rf "$work/run"
"$FRAMELAW" train "$work/config.json" --quiet
"$FRAMELAW" report "$work/run"
t2=$(date +%s)
timeout 120 chromium --headless --no-sandbox --disable-gpu --disable-quic --no-first-run \
  --disable-background-networking --disable-component-update --disable-sync --disable-dev-shm-usage \
  --user-data-dir="$work/profile" --dump-dom "file://$work/run/report.html" >"$work/dom.html" 2>"$work/chromium.err" || {
  echo "check-report-browser: chromium --dump-dom failed:" >&2; tail -5 "$work/chromium.err" >&2; exit 1; }
t3=$(date +%s)
/usr/bin/python3 - "$work/dom.html" <<'PY'
import re, sys
dom = open(sys.argv[1], encoding="utf-8").read()
fail = []
n_math = len(re.findall(r'<math display="block">', dom))
if n_math < 2:  # the learned law and the ensemble law at least (the canonical one when found)
    fail.append(f"{n_math} <math> elements (want 2 or more)")
if "<mfrac>" not in dom:
    fail.append("no <mfrac> (the derivative on the left-hand side)")
boxes = re.findall(r"<textarea[^>]*>(.*?)</textarea>", dom, re.S)
if not any("\\ddot" in b for b in boxes):
    fail.append("no copy box holds the LaTeX source")
outside = re.sub(r"<textarea[^>]*>.*?</textarea>", "", dom, flags=re.S)
for tex in ("\\begin", "\\dot", "\\ddot", "\\frac", "\\sin", "\\cos", "\\times", "_{", "^{"):
    if tex in outside:
        i = outside.index(tex)
        fail.append(f"LaTeX {tex!r} outside the copy boxes: ...{outside[max(0, i - 60):i + 20]!r}")
if re.search(r">x(''|&#39;&#39;) term<", outside):
    fail.append("the x'' term is in the loss legend although model.derivatives is latent")
if fail:
    print("check-report-browser: FAILED:\n  " + "\n  ".join(fail))
    sys.exit(1)
print(f"check-report-browser: the DOM holds {n_math} <math> laws, {len(boxes)} copy boxes, no LaTeX outside them")
PY
t4=$(date +%s)
echo "check-report-browser: passed; seconds: chromium check/install $((t1 - t0)), run and report $((t2 - t1)), browser $((t3 - t2)), total $((t4 - t0))"
