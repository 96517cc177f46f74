#!/usr/bin/python3
"""The plain pandas/numpy baseline of `heft screen` for bench/screen_compare.sh.

What a careful astronomer writes in an afternoon: read the star table with
pandas, take the long-baseline proper motion as the tangent-plane position
difference over the baseline (no perspective acceleration, no RV term),
propagate the catalogue covariances to first order (each catalogue's
position-PM correlations kept, both anomalies' cross-covariance kept) and
write the chi-squared of the late, early and joint anomalies. Vectorised
over all rows; one process.

Usage: screen_numpy.py STAR_TABLE.csv OUTPUT.csv
"""
import sys

import numpy as np
import pandas as pd

MAS_PER_RAD = 180.0 / np.pi * 3.6e6
CORR = ["ra_dec", "ra_parallax", "ra_pmra", "ra_pmdec", "dec_parallax", "dec_pmra", "dec_pmdec",
        "parallax_pmra", "parallax_pmdec", "pmra_pmdec"]
NAMES = ["ra", "dec", "parallax", "pmra", "pmdec"]


def triad(ra_deg, dec_deg):
    a, d = np.radians(ra_deg), np.radians(dec_deg)
    r = np.stack([np.cos(d) * np.cos(a), np.cos(d) * np.sin(a), np.sin(d)], axis=-1)
    p = np.stack([-np.sin(a), np.cos(a), np.zeros_like(a)], axis=-1)
    q = np.stack([-np.sin(d) * np.cos(a), -np.sin(d) * np.sin(a), np.cos(d)], axis=-1)
    return r, p, q


def covariance(t, pre):
    """5x5 covariance per row (alpha*, delta, parallax, pmra, pmdec)."""
    s = np.stack([t[f"{pre}_{n}_error"].to_numpy() for n in NAMES], axis=-1)
    c = np.repeat(np.eye(5)[None], len(t), axis=0)
    k = 0
    for i in range(5):
        for j in range(i + 1, 5):
            v = t[f"{pre}_{CORR[k]}_corr"].fillna(0.0).to_numpy()
            c[:, i, j] = c[:, j, i] = v
            k += 1
    return c * s[:, :, None] * s[:, None, :]


def main(src, dst):
    t = pd.read_csv(src, comment="#")
    dt = (t["late_epoch"] - t["early_epoch"]).to_numpy()
    r1, _, _ = triad(t["early_ra"].to_numpy(), t["early_dec"].to_numpy())
    r2, p2, q2 = triad(t["late_ra"].to_numpy(), t["late_dec"].to_numpy())
    # Position difference in the late tangent plane (mas), over the baseline.
    c = np.sum(r1 * r2, axis=-1)
    d = r2 - r1 / c[:, None]
    long_pm = np.stack([np.sum(d * p2, -1), np.sum(d * q2, -1)], -1) * MAS_PER_RAD / dt[:, None]
    late_pm = t[["late_pmra", "late_pmdec"]].to_numpy()
    early_pm = t[["early_pmra", "early_pmdec"]].to_numpy()
    dpm = np.concatenate([late_pm - long_pm, early_pm - long_pm], axis=1)
    # First-order covariance of (dpm_late, dpm_early): L = (pos2 - pos1) / dt.
    ce, cl = covariance(t, "early"), covariance(t, "late")
    pos, pm = slice(0, 2), slice(3, 5)
    w = 1.0 / dt[:, None, None]
    var_l = (ce[:, pos, pos] + cl[:, pos, pos]) * w * w
    cov = np.empty((len(t), 4, 4))
    cov[:, :2, :2] = cl[:, pm, pm] + var_l - (cl[:, pm, pos] + cl[:, pos, pm]) * w
    cov[:, 2:, 2:] = ce[:, pm, pm] + var_l + (ce[:, pm, pos] + ce[:, pos, pm]) * w
    cov[:, :2, 2:] = var_l - cl[:, pm, pos] * w + ce[:, pos, pm] * w
    cov[:, 2:, :2] = np.transpose(cov[:, :2, 2:], (0, 2, 1))

    def chi2(v, m):
        return np.einsum("ni,ni->n", v, np.linalg.solve(m, v[:, :, None])[:, :, 0])

    out = pd.DataFrame({
        "id": t["id"],
        "dpm_late_ra": dpm[:, 0], "dpm_late_dec": dpm[:, 1],
        "dpm_early_ra": dpm[:, 2], "dpm_early_dec": dpm[:, 3],
        "chi2_late": chi2(dpm[:, :2], cov[:, :2, :2]),
        "chi2_early": chi2(dpm[:, 2:], cov[:, 2:, 2:]),
        "chi2_joint": chi2(dpm, cov),
    })
    out.to_csv(dst, index=False)


if __name__ == "__main__":
    main(sys.argv[1], sys.argv[2])
