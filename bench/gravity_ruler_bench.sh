#!/bin/bash
# The gravity ruler's acceptance sweep (issue 15; docs/methods.md §20): rendered drops under the
# renderer's reference conditions with the hub marker 30 mm in front, 20 mm behind and in the
# drop plane, analysed by `dropfit run` with no offset given, with the offset given, and with
# the ruler off; prints per clip and bounce the errors against truth.json and the joint
# Hunt-Crossley parameters' errors. Clips are cached in DIR.
#   bench/gravity_ruler_bench.sh DROPFIT DIR [--quick]     (--quick: one height, 0.3 m)
set -euo pipefail
DROPFIT=$1
DIR=$2
HEIGHTS=0.2,0.3
[ "${3:-}" = "--quick" ] && HEIGHTS=0.3
mkdir -p "$DIR"
for off in 0.03 -0.02 0; do
  o="$DIR/off_$off"
  if [ ! -f "$o/truth.json" ]; then
    "$DROPFIT" render -o "$o" --law hunt-crossley --param k=2.5e5 --param n=1.5 --param alpha_s_per_m=0.2 \
      --heights "$HEIGHTS" --marker-offset "$off" --threads 2 >/dev/null
  fi
  "$DROPFIT" run "$o" --rig "$o/rig_exact.json" -o "$o/out_none" --jobs 2 >/dev/null 2>&1 || true
  [ "$off" != "0" ] && { "$DROPFIT" run "$o" --rig "$o/rig_exact.json" -o "$o/out_given" --jobs 2 --marker-offset "$off" >/dev/null 2>&1 || true; }
  "$DROPFIT" run "$o" --rig "$o/rig_exact.json" -o "$o/out_off" --jobs 2 --no-gravity-ruler >/dev/null 2>&1 || true
done
python3 - "$DIR" <<'PY'
import json, os, sys
base = sys.argv[1]
for off in ['0.03', '-0.02', '0']:
    d = os.path.join(base, 'off_' + off)
    t = json.load(open(os.path.join(d, 'truth.json')))
    for mode in ['none', 'given', 'off']:
        o = os.path.join(d, 'out_' + mode)
        if not os.path.exists(os.path.join(o, 'summary.json')):
            continue
        s = json.load(open(os.path.join(o, 'summary.json')))
        for sp in s['specimens']:
            print('truth offset %s m, %s: pooled estimate %s +- %s m' % (off, mode, sp.get('marker_offset_gravity_m'),
                                                                         sp.get('marker_offset_gravity_sd_m')))
            for jf in sp['joint_fits']:
                if jf['law'] == t['law']:
                    print('  joint %s: %s' % (jf['law'], ', '.join('%s %+.2f %%' % (k, 100 * (v / t['params'][k] - 1))
                                                                   for k, v in jf['params'].items() if k in t['params'])))
        for c in t['clips']:
            r = json.load(open(os.path.join(o, 'clips', c['clip_id'], 'result.json')))
            print('  %s: offset %s (%s), estimate %s +- %s' % (c['clip_id'], r.get('marker_offset_m'),
                  r.get('marker_offset_source'), r.get('marker_offset_gravity_m'), r.get('marker_offset_gravity_sd_m')))
            for k, im in enumerate(r['impacts'][:len(c['impacts'])]):
                tr = c['impacts'][k]
                if not im['complete']:
                    continue
                print('    bounce %d: speed %+.3f %%, COR %+.4f, deflection %+.3f mm, duration %+.3f ms' % (
                    k, 100 * (im['impact_speed_mps'] / tr['impact_speed_mps'] - 1), im['cor'] - tr['cor'],
                    1000 * (im['max_deflection_m'] - tr['max_deflection_m']),
                    1000 * (im['contact_duration_s'] - tr['contact_duration_s'])))
PY
