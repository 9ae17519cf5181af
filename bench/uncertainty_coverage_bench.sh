#!/bin/bash
# Coverage of every figure's reported standard uncertainty (issue 19, item 3 "Coverage
# benchmark"; acceptance: within 2 reported sd for at least 90 % of the figures pooled and at
# least 85 % per figure kind, RMS of error/sd between 0.5 and 1.5 per kind). Rendered drops with
# known truth over several rigs, each rig calibrated from its own rendered checkerboard images
# (not rig_exact.json), analysed by `dropfit run` with no marker offset given (the gravity ruler
# estimates it); every impact figure, the true law's per-clip parameters and the per-height
# summary means are compared with truth.json in units of the sd the tool reports.
#   bench/uncertainty_coverage_bench.sh DROPFIT DIR
#     TAG=name (environment): write the runs to out<name> (two builds on the same clips).
#     FORCE=1 (environment): re-run `dropfit run` even when out<TAG>/summary.json exists.
#   Clips and rigs are rendered and calibrated once and cached in DIR (DIR/cI, I = 0..11).
# Design: 12 render calls x 3 heights (0.15, 0.3, 0.45 m) = 36 clips. Config I:
#   rig = I/3 of four: 1 px/mm (camera 1.2 m, focal 1200 px) with calibration seeds 101, 102 and
#     0.6 px/mm (camera 2.0 m) with seeds 103, 104 (the default 9x6 board of 50 mm squares);
#   marker plane offset = [0, +0.02, -0.02][I % 3] m; marker = quadrant (I even) or dot (I odd);
#   law = Hunt-Crossley (k 2.5e5, n 1.3, alpha 0.2 s/m) when I/2 is even, else Kelvin-Voigt
#     (k 4e4 N/m, c 100 N s/m); scene seed 1000 + I.
# Each folder is calibrated from its own calib/ images: `dropfit calibrate` with the corner height
# and square of truth.json "calibration", corner height sd 0 (the renderer's corner height is
# exact); the manifest is given the rendered world's exact gravity (gravity_mps2 9.80665,
# gravity_sd_mps2 1e-6); the clock keeps the default tolerance of 50 ppm (CLOCK_PPM=0.01 in the
# environment states the renderer's exact clock instead).
# Figures compared: per clip and bounce (matched by "bounce"; incomplete bounces, in
# truth or result, are skipped and counted) impact and rebound speed, COR, COR from the apex
# heights (truth: the COR), contact duration, maximum deflection, peak force, energy lost (truth:
# m (v_in^2 - v_out^2) / 2); the true law's per-clip fit parameters (result.json "fits"); and the
# per-height means of summary.csv when a column of the mean's sd exists. Printed: per kind the
# count, fraction within 2 sd, RMS and median of |error|/sd and the worst three; the pooled
# fraction; RMS of error/sd split by rig scale, marker kind, marker offset and bounce (the first
# bounce follows the flight from release); the acceptance line.
# Clips with an error over 100 sd are listed as gross failures, with the figures without them as a
# diagnostic (the acceptance counts every figure).
set -euo pipefail
DROPFIT=$1
DIR=$2
TAG=${TAG:-}
FORCE=${FORCE:-0}
mkdir -p "$DIR"
OFFS=(0 0.02 -0.02)
DIST=(1.2 1.2 2.0 2.0)
CSEED=(101 102 103 104)
for i in $(seq 0 11); do
  o="$DIR/c$i"
  rig=$((i / 3))
  off=${OFFS[$((i % 3))]}
  if [ $((i % 2)) -eq 0 ]; then marker=quadrant; else marker=dot; fi
  if [ $(((i / 2) % 2)) -eq 0 ]; then
    law=hunt-crossley; P="--param k=2.5e5 --param n=1.3 --param alpha_s_per_m=0.2"
  else
    law=kelvin-voigt; P="--param k_n_per_m=4e4 --param c_ns_per_m=100"
  fi
  if [ ! -f "$o/truth.json" ]; then
    echo "render c$i: rig $rig (camera ${DIST[$rig]} m, calibration seed ${CSEED[$rig]}), $marker, offset $off m, $law" >&2
    "$DROPFIT" render -o "$o" --law "$law" $P --heights 0.15,0.3,0.45 --seed $((1000 + i)) --threads 2 \
      --camera-distance "${DIST[$rig]}" --calibration-seed "${CSEED[$rig]}" --marker "$marker" \
      --marker-offset "$off" >/dev/null
  fi
  # The rendered world's gravity is exact, and the manifest says so (gravity_mps2 9.80665,
  # gravity_sd_mps2 1e-6), as a user states a surveyed local gravity; the camera clock keeps the
  # tool's default tolerance (50 ppm), which a user states from the camera's data sheet. (With
  # CLOCK_PPM=x in the environment the manifest states that tolerance instead, e.g. 0.01 for the
  # renderer's exact clock.)
  python3 - "$o/manifest.csv" "${CLOCK_PPM:-}" <<'PY'
import sys
p, clock = sys.argv[1], sys.argv[2]
lines = open(p).read().splitlines()
head = next(i for i, l in enumerate(lines) if l and not l.startswith('#'))
cols = lines[head].split(',')
if 'gravity_sd_mps2' not in cols:
    cols += ['gravity_mps2', 'gravity_sd_mps2']
    lines = [l + ',9.80665,1e-6' if i > head and l and not l.startswith('#') else l for i, l in enumerate(lines)]
if 'capture_fps_tolerance_ppm' in cols:  # drop it, then add it back when asked
    k = cols.index('capture_fps_tolerance_ppm')
    del cols[k]
    lines = [','.join(f for j, f in enumerate(l.split(',')) if j != k) if i > head and l and not l.startswith('#') else l
             for i, l in enumerate(lines)]
if clock:
    cols.append('capture_fps_tolerance_ppm')
    lines = [l + ',' + clock if i > head and l and not l.startswith('#') else l for i, l in enumerate(lines)]
lines[head] = ','.join(cols)
open(p, 'w').write('\n'.join(lines) + '\n')
PY
  if [ ! -f "$o/rig.json" ]; then
    read -r sq ch < <(python3 -c 'import json,sys; c=json.load(open(sys.argv[1]))["calibration"]; print(c["square_m"], c["corner_height_m"])' "$o/truth.json")
    "$DROPFIT" calibrate "$o/calib" --board 9x6 --square "$sq" --plane "$o/calib/plane.png" --corner-height "$ch" \
      --corner-height-sd 0 --fps 2000 -o "$o/rig.json" >"$o/calibrate.log" 2>&1 || { echo "calibrate c$i failed" >&2; cat "$o/calibrate.log" >&2; }
  fi
  if [ -f "$o/rig.json" ] && { [ "$FORCE" = 1 ] || [ ! -f "$o/out$TAG/summary.json" ]; }; then
    echo "run c$i -> out$TAG" >&2
    "$DROPFIT" run "$o" --rig "$o/rig.json" -o "$o/out$TAG" --jobs 2 >"$o/run$TAG.log" 2>&1 || echo "run c$i failed (see $o/run$TAG.log)" >&2
  fi
done
python3 - "$DIR" "$TAG" <<'PY'
import csv, json, math, os, re, sys
base, tag = sys.argv[1], sys.argv[2]
OFFS, SCALE, MARK = [0.0, 0.02, -0.02], ['1 px/mm', '1 px/mm', '0.6 px/mm', '0.6 px/mm'], ['quadrant', 'dot']
# impact figure -> (its sd field in result.json, truth value from a truth impact and the truth file)
FIG = {
    'impact_speed_mps': ('impact_speed_sd_mps', lambda ti, t: ti['impact_speed_mps']),
    'rebound_speed_mps': ('rebound_speed_sd_mps', lambda ti, t: ti['rebound_speed_mps']),
    'cor': ('cor_sd', lambda ti, t: ti['cor']),
    'cor_from_apex': ('cor_from_apex_sd', lambda ti, t: ti['cor']),
    'contact_duration_s': ('contact_duration_sd_s', lambda ti, t: ti['contact_duration_s']),
    'max_deflection_m': ('max_deflection_sd_m', lambda ti, t: ti['max_deflection_m']),
    'peak_force_n': ('peak_force_sd_n', lambda ti, t: ti['peak_force_n']),
    'energy_lost_j': ('energy_lost_sd_j', lambda ti, t: 0.5 * t['mass_kg'] * (ti['impact_speed_mps'] ** 2
                                                                             - ti['rebound_speed_mps'] ** 2)),
}
rows = []  # (kind, config, clip, bounce, error, sd)
skipped = {'incomplete bounce': 0, 'figure or sd missing': 0, 'no result': 0}
summary_cols = None
print('per folder: rig (calibrated from its own images) and marker plane (gravity ruler) against truth')
print('%-4s %-9s %-8s %7s %-13s %9s %9s %8s %9s  %s' % ('cfg', 'scale', 'marker', 'off_mm', 'law', 'scale_err%',
      'scale_sd%', 'err/sd', 'floor_sd_mm', 'offset estimate - truth [mm] (+- sd) per clip'))
for i in range(12):
    d = os.path.join(base, 'c%d' % i)
    if not os.path.exists(os.path.join(d, 'truth.json')):
        print('c%d: not rendered' % i)
        continue
    t = json.load(open(os.path.join(d, 'truth.json')))
    cfg = {'scale': SCALE[i // 3], 'marker': MARK[i % 2], 'offset': '%+.0f mm' % (1000 * OFFS[i % 3])}
    rigp = os.path.join(d, 'rig.json')
    line = '%-4s %-9s %-8s %+7.0f %-13s' % ('c%d' % i, cfg['scale'], cfg['marker'], 1000 * OFFS[i % 3], t['law'])
    if os.path.exists(rigp):
        rig = json.load(open(rigp))
        mpp, mpp_t = rig['quality']['metres_per_px_centre'], t['camera']['metres_per_px_centre']
        u = rig.get('uncertainty', {})
        ssd = u.get('scale_rel_sd_centre') or float('nan')
        e = mpp / mpp_t - 1
        line += ' %+9.4f %9.4f %+8.2f %9.4f' % (100 * e, 100 * ssd, e / ssd if ssd > 0 else float('nan'),
                                               1000 * (u.get('floor_sd_m') or float('nan')))
    else:
        line += ' (no rig: calibration failed)'
    out = os.path.join(d, 'out' + tag)
    offs = []
    for c in t['clips']:
        p = os.path.join(out, 'clips', c['clip_id'], 'result.json')
        if not os.path.exists(p):
            skipped['no result'] += len(c['impacts'])
            offs.append('none')
            continue
        r = json.load(open(p))
        est, esd = r.get('marker_offset_gravity_m'), r.get('marker_offset_gravity_sd_m')
        offs.append('%+.2f (%.2f)' % (1000 * (est - OFFS[i % 3]), 1000 * esd) if est is not None and esd is not None
                    else 'none')
        ims = {im.get('bounce', k): im for k, im in enumerate(r['impacts'])}
        for b, ti in enumerate(c['impacts']):
            im = ims.get(b)
            if im is None or not im.get('complete') or not ti.get('complete', True):
                skipped['incomplete bounce'] += 1
                continue
            for k, (sdk, tv) in FIG.items():
                v, sd = im.get(k), im.get(sdk)
                if v is None or sd is None:
                    skipped['figure or sd missing'] += 1
                    continue
                rows.append((k, dict(cfg, bounce='bounce %d' % b), c['clip_id'], 'c%d/%s' % (i, c['clip_id']), b,
                             v - tv(ti, t), sd))
        fit = [f for f in r.get('fits', []) if f.get('law') == t['law']]
        for k, tv in t['params'].items():
            if not fit or fit[0].get('params', {}).get(k) is None:
                skipped['figure or sd missing'] += 1
                continue
            sd = (fit[0].get('param_sd') or {}).get(k)
            if sd is None:
                skipped['figure or sd missing'] += 1
                continue
            rows.append(('param ' + k, dict(cfg, bounce='-'), c['clip_id'], 'c%d/%s' % (i, c['clip_id']), '-', fit[0]['params'][k] - tv, sd))
    print(line + '  ' + ', '.join(offs))
    # per-height means of summary.csv: compared when a column of the mean's uncertainty exists
    sp = os.path.join(out, 'summary.csv')
    if os.path.exists(sp):
        rd = list(csv.DictReader(open(sp)))
        if summary_cols is None:
            summary_cols = list(rd[0].keys()) if rd else []
        for row in rd:
            h = float(row['drop_height_m'])
            tc = [c for c in t['clips'] if abs(c['drop_height_m'] - h) < 0.01 and c['impacts']]
            for col in row:
                m = re.match(r'^(.*)_mean_(sd|u|unc\w*)$', col)
                if not m or m.group(1) not in FIG or not row[col] or not row.get(m.group(1) + '_mean'):
                    continue
                fk = m.group(1)
                tm = sum(FIG[fk][1](c['impacts'][0], t) for c in tc) / len(tc)  # first bounce per clip
                rows.append(('mean ' + fk, dict(cfg, bounce='bounce 0'), 'h%.2f' % h, 'c%d/h%.2f' % (i, h), 0,
                             float(row[fk + '_mean']) - tm, float(row[col])))
print('\nsummary.csv columns: %s' % ', '.join(summary_cols or []))
if not any(r[0].startswith('mean ') for r in rows):
    print('  no column of a per-height mean\'s uncertainty (<figure>_mean_sd): the means are not compared '
          '(the *_sd columns are the spread over repeats)')
print('skipped: ' + ', '.join('%d %s' % (v, k) for k, v in skipped.items()))

def z(r):
    return abs(r[5]) / r[6] if r[6] > 0 else float('inf')
kinds = list(dict.fromkeys(r[0] for r in rows))
print('\n%-28s %5s %8s %9s %9s  %s' % ('figure kind', 'n', 'in 2sd', 'RMS e/sd', 'med|e|/sd', 'worst 3 (clip, bounce, error, sd)'))
verdict = []
for k in kinds:
    rk = [r for r in rows if r[0] == k]
    zs = sorted(z(r) for r in rk)
    frac = sum(x <= 2 for x in zs) / len(zs)
    rms = math.sqrt(sum(x * x for x in zs) / len(zs))
    med = zs[len(zs) // 2] if len(zs) % 2 else 0.5 * (zs[len(zs) // 2 - 1] + zs[len(zs) // 2])
    worst = sorted(rk, key=z, reverse=True)[:3]
    print('%-28s %5d %7.1f%% %9.3g %9.3g  %s' % (k, len(zs), 100 * frac, rms, med,
          '; '.join('%s b%s %.4g/%.3g' % (w[3], w[4], w[5], w[6]) for w in worst)))
    verdict.append((k, frac, rms))
pooled = sum(z(r) <= 2 for r in rows) / max(len(rows), 1)
print('pooled: %d figures, %.1f %% within 2 sd' % (len(rows), 100 * pooled))
# Gross failures (a clip whose error is over 100 sd in some figure: the track, not the sd, failed)
# listed apart; the RMS without them is a diagnostic only, not the acceptance.
gross = sorted(set(r[3] for r in rows if z(r) > 100 and not r[0].startswith('mean ')))
if gross:
    print('clips with an error over 100 sd (gross failures): %s' % ', '.join(gross))
    rest = [r for r in rows if r[3] not in gross]
    print('  without them (diagnostic, not the acceptance): %d figures, %.1f %% within 2 sd; RMS e/sd per kind: %s' % (
        len(rest), 100 * sum(z(r) <= 2 for r in rest) / max(len(rest), 1),
        ', '.join('%s %.3g' % (k, math.sqrt(sum(z(r) ** 2 for r in rest if r[0] == k) /
                                            max(1, sum(1 for r in rest if r[0] == k)))) for k in kinds)))
for key, groups in (('scale', ['1 px/mm', '0.6 px/mm']), ('marker', MARK), ('offset', ['+0 mm', '+20 mm', '-20 mm']),
                    ('bounce', ['bounce 0', 'bounce 1', 'bounce 2'])):
    print('\nRMS of error/sd by %s:' % key)
    print('%-28s' % 'figure kind' + ''.join('%12s' % g for g in groups))
    for k in kinds + ['(pooled)']:
        cells = []
        for g in groups:
            zs = [z(r) for r in rows if (k == '(pooled)' or r[0] == k) and r[1][key] == g]
            cells.append('%12.3g' % math.sqrt(sum(x * x for x in zs) / len(zs)) if zs else '%12s' % '-')
        print('%-28s' % k + ''.join(cells))
# The acceptance is over the figures of issue 19, item 1 (each impact's figures and the law
# parameters); the per-height means of summary.csv (item 2) are judged by the same rule, apart.
item1 = [v for v in verdict if not v[0].startswith('mean ')]
rows1 = [r for r in rows if not r[0].startswith('mean ')]
pooled1 = sum(z(r) <= 2 for r in rows1) / max(len(rows1), 1)
print('\nacceptance (issue 19, the figures of item 1): pooled >= 90 %% within 2 sd: %.1f %% of %d %s' % (
    100 * pooled1, len(rows1), 'PASS' if pooled1 >= 0.9 else 'FAIL'))
def judge(group):
    for k, frac, rms in group:
        ok = frac >= 0.85 and 0.5 <= rms <= 1.5
        print('  %-28s within 2 sd %5.1f %% (>= 85 %%), RMS e/sd %8.3g (0.5..1.5): %s' % (k, 100 * frac, rms, 'PASS' if ok else 'FAIL'))
    return all(f >= 0.85 and 0.5 <= r <= 1.5 for _, f, r in group)
ok1 = judge(item1)
print('overall (item 1): %s' % ('PASS' if pooled1 >= 0.9 and ok1 else 'FAIL'))
means = [v for v in verdict if v[0].startswith('mean ')]
if means:
    print('\nper-height means of summary.csv (item 2), judged by the same rule:')
    print('means: %s' % ('PASS' if judge(means) else 'FAIL'))
PY
