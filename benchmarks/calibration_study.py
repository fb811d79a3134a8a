"""How well beacon calibration recovers a hidden truth, and how often calibrated fixes hold the transmitter.

    .venv/bin/python benchmarks/calibration_study.py [--seeds 10] [--trials 300] [--fixes 3000]

For each seed and each error model (normal; von Mises; normal with 3 % wild trials 30-150 deg off):
1. Three antennas get a hidden bias (uniform -5..5 deg) and SD (uniform 2..10 deg). A trials sheet is
   made with pyproj's geodesics (not dfkit): ``--trials`` trials per antenna on 8 beacons, stations 300 m to
   3 km away.
2. ``dfkit.calibration.calibrate`` is run on it. Recorded: how often the bias lies within 3 standard errors
   (sd / sqrt(n), from the truth) and the SD within 15 % of the truth (for von Mises, the truth is the
   distribution's own linear SD, by numerical integration).
3. ``--fixes`` field fixes of 3 bearings (stations 500-1500 m around the target, one antenna per fix, no sd
   column) are solved (mle) with the calibration using, in turn, each candidate SD: ``sd_deg`` (the sample
   SD, the one dfkit uses), ``circular_sd_deg`` and ``sd_from_kappa_deg``; also uncalibrated (SD from each
   fix's own residuals, F(2, 1)), with the true bias and SD (an oracle: what the regions themselves achieve),
   and with the right SD but the bias left in. Recorded: how often the 95 % ellipse holds the truth, and the
   median ellipse area; and the calibrated coverage by the antenna's true SD.
4. The wild-trial rule on clean normal samples of 5 to 300 trials: how many good trials it flags.
Prints the tables. Nothing is asserted: the numbers go into DEVELOPERS.md.
"""

from __future__ import annotations

import argparse
import time

import numpy as np
import pandas as pd
import pyproj

from dfkit import calibration, read_bearings
from dfkit.locate import locate

GEOD = pyproj.Geod(ellps="WGS84")
LAT0, LON0 = 46.8, 9.9


def vm_linear_sd(kappa):
    """Linear SD of a von Mises distribution on (-pi, pi] [deg], by numerical integration."""
    x = np.linspace(-np.pi, np.pi, 200_001)
    f = np.exp(kappa * (np.cos(x) - 1))
    return float(np.degrees(np.sqrt(np.trapezoid(x * x * f, x) / np.trapezoid(f, x))))


def draw(rng, model, bias, sd, n, wild_out=None):
    if model == "vonmises":
        k = float(calibration.kappa_from_rbar(np.exp(-(np.radians(sd) ** 2) / 2)))
        return bias + np.degrees(rng.vonmises(0.0, k, n))
    e = rng.normal(bias, sd, n)
    if model == "contaminated":
        wild = rng.random(n) < 0.03
        e[wild] += rng.choice([-1, 1], wild.sum()) * rng.uniform(30, 150, wild.sum())
        if wild_out is not None:
            wild_out.append(wild)
    return e


def true_sd(model, sd):
    if model == "vonmises":
        return vm_linear_sd(float(calibration.kappa_from_rbar(np.exp(-(np.radians(sd) ** 2) / 2))))
    return sd


def trials_text(rng, model, antennas, n_per):
    blon0 = LON0 + rng.uniform(-0.04, 0.04, 8)
    blat0 = LAT0 + rng.uniform(-0.03, 0.03, 8)
    rows = ["fix,lat,lon,bearing,antenna,beacon,beacon_lat,beacon_lon"]
    for name, (bias, sd) in antennas.items():
        b = np.arange(n_per) % 8
        lon, lat, back = GEOD.fwd(
            blon0[b], blat0[b], rng.uniform(0, 360, n_per), rng.uniform(300, 3000, n_per)
        )
        obs = (np.asarray(back) + draw(rng, model, bias, sd, n_per)) % 360  # back: station -> beacon
        rows += [
            f"B{bb}-{name}-{i // 32},{la:.8f},{lo:.8f},{o:.4f},{name},B{bb},{blat0[bb]:.8f},{blon0[bb]:.8f}"
            for i, (bb, la, lo, o) in enumerate(zip(b, lat, lon, obs))
        ]
    return "\n".join(rows) + "\n"


def field(rng, model, antennas, n_fix, with_sd=False):
    names = list(antennas)
    tlat = LAT0 + rng.uniform(-0.04, 0.04, n_fix)
    tlon = LON0 + rng.uniform(-0.06, 0.06, n_fix)
    ang = rng.uniform(0, 360, (n_fix, 1)) + np.array([0, 120, 240]) + rng.normal(0, 15, (n_fix, 3))
    lon, lat, back = GEOD.fwd(
        np.repeat(tlon, 3), np.repeat(tlat, 3), ang.ravel(), rng.uniform(500, 1500, 3 * n_fix)
    )
    ant = np.repeat(np.arange(n_fix) % len(names), 3)
    obs = np.asarray(back).copy()  # back azimuth at the station: towards the target
    sds = np.zeros(3 * n_fix)
    wild = np.zeros(3 * n_fix, bool)
    for k, name in enumerate(names):
        m = ant == k
        got = []
        obs[m] += draw(rng, model, *antennas[name], int(m.sum()), got)
        wild[m] = got[0] if got else False
        sds[m] = antennas[name][1]
    rows = ["fix,lat,lon,bearing,antenna" + (",sd" if with_sd else "")]
    rows += [
        f"F{i // 3},{la:.8f},{lo:.8f},{o % 360:.4f},{names[a]}" + (f",{s}" if with_sd else "")
        for i, (la, lo, o, a, s) in enumerate(zip(lat, lon, obs, ant, sds))
    ]
    return "\n".join(rows) + "\n", tlat, tlon, wild.reshape(n_fix, 3).any(axis=1)


def hold(fixes, tlat, tlon, only=None, per_fix=None):
    t = fixes.table
    if only is not None:
        t = t[only[t["fix"].str[1:].astype(int).to_numpy()]]
    idx = t["fix"].str[1:].astype(int).to_numpy()
    has = t["semi_major_m"].notna().to_numpy()
    ins, _ = calibration.inside_ellipse(
        t["lat"].to_numpy()[has],
        t["lon"].to_numpy()[has],
        t["semi_major_m"].to_numpy()[has],
        t["semi_minor_m"].to_numpy()[has],
        t["orientation_deg"].to_numpy()[has],
        tlat[idx[has]],
        tlon[idx[has]],
    )
    if per_fix is not None:
        per_fix.append(pd.Series(ins, index=idx[has]))
    return int(ins.sum()), int(has.sum()), float(np.median(t["area_m2"].to_numpy()[has]))


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--seeds", type=int, default=10)
    ap.add_argument("--trials", type=int, default=300)
    ap.add_argument("--fixes", type=int, default=3000)
    a = ap.parse_args()
    t0 = time.perf_counter()
    rec = []
    by_sd = []
    for model in ("normal", "vonmises", "contaminated"):
        for seed in range(a.seeds):
            rng = np.random.default_rng(1000 * seed + len(model))
            antennas = {f"ant{k}": (float(rng.uniform(-5, 5)), float(rng.uniform(2, 10))) for k in range(3)}
            cal = calibration.calibrate(read_trials_bytes(trials_text(rng, model, antennas, a.trials)))
            c = cal.table.set_index("antenna")
            for name, (bias, sd) in antennas.items():
                s_true = true_sd(model, sd)
                rec.append(
                    dict(
                        model=model,
                        kind="recovery",
                        bias_ok=abs(c.loc[name, "bias_deg"] - bias) <= 3 * s_true / np.sqrt(c.loc[name, "n"]),
                        sd_ok=abs(c.loc[name, "sd_deg"] / s_true - 1) <= 0.15,
                        sd_ratio=c.loc[name, "sd_deg"] / s_true,
                    )
                )
            text, tlat, tlon, has_wild = field(rng, model, antennas, a.fixes)
            raw = read_bearings(text.encode())
            for choice in ("sd_deg", "circular_sd_deg", "sd_from_kappa_deg"):
                alt = calibration.Calibration(table=cal.table.assign(sd_deg=cal.table[choice]), by=cal.by)
                per_fix = []
                k, n, area = hold(locate(calibration.apply(raw, alt)), tlat, tlon, per_fix=per_fix)
                rec.append(dict(model=model, kind=f"calibrated, {choice}", inside=k, n=n, area=area))
                if choice == "sd_deg":
                    sd_of_fix = np.array([antennas[f"ant{i % 3}"][1] for i in per_fix[0].index])
                    for lo in (2, 4, 6, 8):
                        m = (sd_of_fix >= lo) & (sd_of_fix < lo + 2)
                        by_sd.append(
                            dict(
                                model=model,
                                sd_band=f"{lo}-{lo + 2} deg",
                                inside=int(per_fix[0][m].sum()),
                                n=int(m.sum()),
                            )
                        )
                if choice == "sd_deg" and has_wild.any():
                    k, n, area = hold(locate(calibration.apply(raw, alt)), tlat, tlon, ~has_wild)
                    rec.append(
                        dict(
                            model=model,
                            kind="calibrated, sd_deg, fixes with no wild bearing",
                            inside=k,
                            n=n,
                            area=area,
                        )
                    )
            oracle = pd.DataFrame(
                {
                    "by": "antenna",
                    "antenna": list(antennas),
                    "group": list(antennas),
                    "n": 10**9,
                    "dof": 10**9 - 1,
                    "status": "ok",
                    "bias_deg": [v[0] for v in antennas.values()],
                    "sd_deg": [true_sd(model, v[1]) for v in antennas.values()],
                }
            )
            k, n, area = hold(
                locate(calibration.apply(raw, calibration.Calibration(oracle, by=("antenna",)))), tlat, tlon
            )
            rec.append(dict(model=model, kind="oracle: true bias and SD", inside=k, n=n, area=area))
            k, n, area = hold(locate(raw), tlat, tlon)
            rec.append(dict(model=model, kind="uncalibrated (F(2,1))", inside=k, n=n, area=area))
            text2, tlat2, tlon2, _ = field(
                np.random.default_rng(seed), model, antennas, a.fixes, with_sd=True
            )
            k, n, area = hold(locate(read_bearings(text2.encode())), tlat2, tlon2)
            rec.append(dict(model=model, kind="true SD, bias left in", inside=k, n=n, area=area))
    df = pd.DataFrame(rec)
    print(
        f"{a.seeds} seeds x 3 antennas, {a.trials} trials per antenna, {a.fixes} fixes of 3 bearings "
        "per seed; "
        f"{time.perf_counter() - t0:.0f} s\n"
    )
    r = (
        df[df["kind"] == "recovery"]
        .groupby("model")
        .agg(
            bias_within_3se=("bias_ok", "mean"),
            sd_within_15pct=("sd_ok", "mean"),
            sd_ratio_min=("sd_ratio", "min"),
            sd_ratio_max=("sd_ratio", "max"),
        )
    )
    print(r.round(3).to_string(), "\n")
    f = df[df["kind"] != "recovery"].copy()
    f["rate"] = f["inside"] / f["n"]
    g = f.groupby(["model", "kind"], sort=False).agg(
        inside=("inside", "sum"),
        n=("n", "sum"),
        rate_min=("rate", "min"),
        rate_max=("rate", "max"),
        median_area_ha=("area", "median"),
    )
    g["coverage"] = g["inside"] / g["n"]
    g["wilson_95"] = [("%.3f-%.3f" % calibration.wilson_interval(k, n)) for k, n in zip(g["inside"], g["n"])]
    g["median_area_ha"] /= 1e4
    print(
        g[["n", "coverage", "wilson_95", "rate_min", "rate_max", "median_area_ha"]].round(3).to_string(), "\n"
    )
    s = pd.DataFrame(by_sd).groupby(["model", "sd_band"]).sum()
    s["coverage"] = s["inside"] / s["n"]
    print("calibrated (sd_deg), by the antenna's true SD:")
    print(s.round(3).to_string(), "\n")
    wild_rule_false_flags()


def wild_rule_false_flags(n_samples=2000):
    """Share of clean normal trials the wild-trial rule flags, and of samples with at least one flag."""
    rng = np.random.default_rng(5)
    rows = []
    for n in (5, 8, 12, 20, 30, 50, 100, 300):
        flags = [calibration.groups._wild_mask(rng.normal(0.0, 5.0, n))[0] for _ in range(n_samples)]
        rows.append(
            dict(
                n=n,
                trials_flagged=np.mean([f.mean() for f in flags]),
                samples_with_a_flag=np.mean([f.any() for f in flags]),
            )
        )
    print(f"wild-trial rule on clean normal trials (SD 5 deg, {n_samples} samples per n):")
    print(pd.DataFrame(rows).round(5).to_string(index=False))


def read_trials_bytes(text):
    return calibration.read_trials(text.encode())


if __name__ == "__main__":
    main()
