"""Wrong ok fixes by cause, per method, station layout and number of bearings.

Sheets of invented fixes (benchmarks/coverage.py's scenarios, SD 5° given) where a share of the fixes has one wild
bearing; each ok fix is put in one class: clean (no wild bearing), "wild dropped" (the robust fit dropped the wild
bearing), "GOOD dropped" (it dropped a good one and kept the wild one), "wild kept" (no bearing dropped). For each
class: ok fixes whose region misses the transmitter / ok fixes. Clean fixes should miss about 5 % of the time;
the rest are the wrong answers marked ok.

    python benchmarks/wrong_ok.py --fixes 1500 --share 0.15 --wild 30-60
"""
import argparse
import collections
import os
import re
import sys

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import numpy as np, coverage as cv
from dfkit.locate import locate
ap = argparse.ArgumentParser(); ap.add_argument('--fixes', type=int, default=1500); ap.add_argument('--share', type=float, default=0.15)
ap.add_argument('--methods', default='mle,huber,andrews,lsq'); ap.add_argument('--ns', default='3,4,5'); ap.add_argument('--geoms', default='spread,random,arc')
ap.add_argument('--wild', default='30-60'); ap.add_argument('--dump', default='', help='print up to three andrews fixes that dropped a good line')
a = ap.parse_args()
tot = collections.Counter()
for n in map(int, a.ns.split(',')):
  for geom in a.geoms.split(','):
    sc = cv.simulate(a.fixes, n, 5.0, np.random.default_rng(7 + n), outlier=a.share, geometry=geom, wild=cv.WILD_RANGES[a.wild])
    b = cv.read(sc, 5.0)
    for m in a.methods.split(','):
        fx = locate(b, method=m, sheet_checks=False)
        t = fx.table
        ok = t.status.to_numpy() == 'ok'
        inr = fx.contains(sc['tlat'], sc['tlon'])
        bad = sc['bad']
        drop = np.full(len(t), -1)
        for i, r in enumerate(t.reason.to_numpy()):
            mm = re.search(r'line (\d+) dropped', r)
            if mm: drop[i] = (int(mm.group(1)) - 2) - i * n
        c = collections.Counter()
        for i in np.flatnonzero(ok):
            if bad[i] < 0: k = 'clean'
            elif drop[i] == bad[i]: k = 'wild dropped'
            elif drop[i] >= 0: k = 'GOOD dropped'
            else: k = 'wild kept'
            c[k, bool(inr[i])] += 1
        wild_ok = sum(v for (k, hit), v in c.items() if k != 'clean')
        miss = {k: c[k, False] for k in ('clean', 'wild dropped', 'GOOD dropped', 'wild kept')}
        okc = inr[ok].mean()
        print(f"n={n} {geom:6s} {m:7s} ok={ok.mean():.3f} cover(ok)={okc:.3f} wild-fix ok={wild_ok:4d} miss: " + ", ".join(f"{k} {v}/{c[k,True]+v}" for k, v in miss.items()), flush=True)
        for k, v in miss.items(): tot[m, k] += v
        if a.dump and m == 'andrews':
            for i in np.flatnonzero(ok & ~inr & (bad >= 0) & (drop >= 0) & (drop != bad))[:3]:
                print('   dump', n, geom, i, 'truth', sc['tlat'][i], sc['tlon'][i], 'bad', bad[i], 'drop', drop[i], 'risk', t.wild_risk[i], t.reason[i][:200])
                for j in range(n): print('     ', sc['lat'][i, j], sc['lon'][i, j], sc['bearing'][i, j])
print(dict(tot))
