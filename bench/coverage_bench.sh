#!/bin/bash
# Coverage of the law parameters' reported uncertainties (issue 16): one rendered drop height,
# N noise realisations (`render --repeats N`: other sensor noise, textures and release height
# per repeat) of a law the data resolve, under the renderer's reference conditions, each clip
# analysed by `dropfit run`; prints per clip and parameter the error in reported SDs of the
# true law's per-clip fit, and the fraction of parameters within 2 SD pooled (the issue asks at
# least 90 %; for Gaussian errors with honest SDs it is 95.4 %).
#   bench/coverage_bench.sh DROPFIT DIR [LAW] [REPEATS]
#     LAW: hunt-crossley (k 2.5e5, n 1.3, alpha 0.2; default) or kelvin-voigt (k 4e4, c 100)
#     REPEATS: noise realisations, default 20. Clips are rendered once and cached in DIR.
set -euo pipefail
DROPFIT=$1
DIR=$2
LAW=${3:-hunt-crossley}
REPEATS=${4:-20}
case $LAW in
  hunt-crossley) P="--param k=2.5e5 --param n=1.3 --param alpha_s_per_m=0.2" ;;
  kelvin-voigt) P="--param k_n_per_m=4e4 --param c_ns_per_m=100" ;;
  *) echo "coverage_bench: LAW is hunt-crossley or kelvin-voigt" >&2; exit 2 ;;
esac
o="$DIR/${LAW}_x$REPEATS"
mkdir -p "$DIR"
if [ ! -f "$o/truth.json" ]; then
  "$DROPFIT" render -o "$o" --law "$LAW" $P --heights 0.3 --repeats "$REPEATS" --threads 2 >/dev/null
fi
[ -f "$o/out/summary.json" ] || "$DROPFIT" run "$o" --rig "$o/rig_exact.json" -o "$o/out" --jobs 2 >/dev/null 2>&1 || true
python3 - "$o" <<'PY'
import json, os, sys
o = sys.argv[1]
t = json.load(open(os.path.join(o, 'truth.json')))
within = total = 0
sumsq = {}
for c in t['clips']:
    p = os.path.join(o, 'out', 'clips', c['clip_id'], 'result.json')
    if not os.path.exists(p):
        print('%s: no result' % c['clip_id'])
        continue
    r = json.load(open(p))
    fit = [f for f in r['fits'] if f['law'] == t['law']][0]
    z = {}
    for k, v in fit['params'].items():
        if k not in t['params']:
            continue
        sd = fit['param_sd'][k]
        z[k] = (v - t['params'][k]) / sd if sd > 0 else float('inf')
        total += 1
        within += abs(z[k]) <= 2
        sumsq.setdefault(k, []).append(z[k] ** 2)
    print('%s: best %s; error / sd: %s' % (c['clip_id'], r.get('best_law'),
                                          ', '.join('%s %+.2f' % kv for kv in z.items())))
for k, v in sumsq.items():
    print('%s: RMS of error/sd %.2f over %d clips' % (k, (sum(v) / len(v)) ** 0.5, len(v)))
print('within 2 sd: %d of %d (%.1f %%; the issue asks >= 90 %%)' % (within, total, 100.0 * within / max(total, 1)))
PY
