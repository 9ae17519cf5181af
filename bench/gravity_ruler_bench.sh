#!/bin/bash
# The gravity ruler's acceptance sweep (issue 15; docs/methods.md §20): rendered drops under the
# renderer's reference conditions, a Hunt-Crossley and a Kelvin-Voigt specimen, three heights,
# with the hub marker 30 mm in front, 20 mm behind and in the drop plane, analysed by
# `dropfit run` with no offset given, with the offset given, and with the ruler off. Prints per
# clip and bounce the errors against truth.json, the joint fit's parameter errors, and one line
# per case with the largest errors against the acceptance limits (impact speed 0.2 %, COR 0.002,
# maximum deflection 0.1 mm, contact duration 0.1 ms, stiffness 2 %, offset 1 mm).
#   bench/gravity_ruler_bench.sh DROPFIT DIR [--quick]
#     --quick: Hunt-Crossley only, one height (0.3 m)
#     LAWS="..." (environment): the specimens to sweep.
#     TAG=name (environment): write the runs to out_<mode><name> (two builds on the same clips).
#   Clips are rendered once and cached in DIR. The rows "off" with an offset in truth show what
#   the ruler corrects (they are not held to the limits).
set -euo pipefail
DROPFIT=$1
DIR=$2
QUICK=${3:-}
TAG=${TAG:-}
HEIGHTS=0.15,0.3,0.45
LAWS=${LAWS:-"hunt-crossley kelvin-voigt"}
if [ "$QUICK" = "--quick" ]; then HEIGHTS=0.3; LAWS=hunt-crossley; fi
mkdir -p "$DIR"
for law in $LAWS; do
  case $law in
    hunt-crossley) P="--param k=2.5e5 --param n=1.5 --param alpha_s_per_m=0.2" ;;
    kelvin-voigt) P="--param k_n_per_m=4e4 --param c_ns_per_m=100" ;;
  esac
  for off in 0.03 -0.02 0; do
    o="$DIR/${law}_off_$off"
    if [ ! -f "$o/truth.json" ]; then
      "$DROPFIT" render -o "$o" --law "$law" $P --heights "$HEIGHTS" --marker-offset "$off" --threads 2 >/dev/null
    fi
    "$DROPFIT" run "$o" --rig "$o/rig_exact.json" -o "$o/out_none$TAG" --jobs 2 >/dev/null 2>&1 || true
    if [ "$off" != "0" ]; then
      "$DROPFIT" run "$o" --rig "$o/rig_exact.json" -o "$o/out_given$TAG" --jobs 2 --marker-offset "$off" \
        >/dev/null 2>&1 || true
    fi
    "$DROPFIT" run "$o" --rig "$o/rig_exact.json" -o "$o/out_off$TAG" --jobs 2 --no-gravity-ruler >/dev/null 2>&1 || true
  done
done
python3 - "$DIR" "$TAG" "$LAWS" <<'PY'
import json, os, sys
base, tag, laws = sys.argv[1], sys.argv[2], sys.argv[3].split()
STIFF = {'hunt-crossley': 'k', 'kelvin-voigt': 'k_n_per_m'}
LIMITS = (0.2, 0.002, 0.1, 0.1, 2.0, 1.0)
rows = []
for law in laws:
    for off in ['0.03', '-0.02', '0']:
        d = os.path.join(base, law + '_off_' + off)
        t = json.load(open(os.path.join(d, 'truth.json')))
        for mode in ['none', 'given', 'off']:
            o = os.path.join(d, 'out_' + mode + tag)
            if not os.path.exists(os.path.join(o, 'summary.json')):
                continue
            worst = [0.0] * 6
            s = json.load(open(os.path.join(o, 'summary.json')))
            print('%s, truth offset %s m, %s:' % (law, off, mode))
            for sp in s['specimens']:
                print('  pooled offset estimate %s +- %s m' % (sp.get('marker_offset_gravity_m'),
                                                              sp.get('marker_offset_gravity_sd_m')))
                for jf in sp['joint_fits']:
                    if jf['law'] == t['law']:
                        errs = {k: 100 * (v / t['params'][k] - 1) for k, v in jf['params'].items() if k in t['params']}
                        print('  joint %s: %s' % (jf['law'], ', '.join('%s %+.2f %%' % kv for kv in errs.items())))
                        worst[4] = max(worst[4], abs(errs.get(STIFF[law], float('nan'))))
            for c in t['clips']:
                r = json.load(open(os.path.join(o, 'clips', c['clip_id'], 'result.json')))
                est = r.get('marker_offset_gravity_m')
                print('  %s: offset %s (%s), estimate %s +- %s, onset %.5f (%s), best %s' % (
                    c['clip_id'], r.get('marker_offset_m'), r.get('marker_offset_source'), est,
                    r.get('marker_offset_gravity_sd_m'), r.get('onset_height_m', float('nan')),
                    r.get('onset_height_source'), r.get('best_law')))
                if mode == 'none' and est is not None:
                    worst[5] = max(worst[5], 1000 * abs(est - float(off)))
                for k, im in enumerate(r['impacts'][:len(c['impacts'])]):
                    tr = c['impacts'][k]
                    if not im['complete']:
                        continue
                    e = (100 * (im['impact_speed_mps'] / tr['impact_speed_mps'] - 1), im['cor'] - tr['cor'],
                         1000 * (im['max_deflection_m'] - tr['max_deflection_m']),
                         1000 * (im['contact_duration_s'] - tr['contact_duration_s']))
                    for i in range(4):
                        worst[i] = max(worst[i], abs(e[i]))
                    print('    bounce %d: speed %+.3f %%, COR %+.4f, deflection %+.3f mm, duration %+.3f ms' % ((k,) + e))
            rows.append((law, off, mode, worst))
print('\nlargest errors per case (limits: speed %.1f %%, COR %.3f, deflection %.1f mm, duration %.1f ms, '
      'stiffness %.0f %%, offset %.0f mm)' % LIMITS)
print('%-14s %6s %-5s %8s %7s %8s %8s %8s %7s  %s' % ('law', 'offset', 'mode', 'speed%', 'COR', 'defl_mm',
                                                  'dur_ms', 'stiff%', 'off_mm', 'within'))
for law, off, mode, w in rows:
    ok = all(w[i] <= LIMITS[i] for i in range(6))
    verdict = 'yes' if ok else 'NO'
    if mode == 'off' and off != '0':
        verdict = '(ruler off: uncorrected)'
    print('%-14s %6s %-5s %8.3f %7.4f %8.3f %8.3f %8.2f %7.2f  %s' % ((law, off, mode) + tuple(w) + (verdict,)))
PY
