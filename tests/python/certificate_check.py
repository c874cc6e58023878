"""Independent recomputation of a map's accuracy certificate, called by tests/integration/fits.rs.

Usage: certificate_check.py FILE

Opens FILE with astropy (verification of every HDU and of both checksums of each), reads the
binary lens from the LENSn keywords, the pixel values from the primary image and the sampled
pixels from the ERRSAMPL table, and computes each sampled pixel's mean point-source
magnification with numpy alone: the images as the eigenvalues of the companion matrix of the
binary-lens quintic (Witt & Mao 1995), polished by Newton steps and kept where they satisfy the
lens equation; magnification 1 / |det J| summed over images. Rules differ from causeway's on
purpose: a 10 x 10 Gauss-Legendre rule over the pixel away from caustics, and 12 x 12
sub-squares of a 6 x 6 rule each near them. Prints, one record per line:
  checksum,<hdu>,<verify_checksum()>,<verify_datasum()>
  stated,<class>,<count>,<median>,<p99>       the header's numbers (class: away, near)
  numpy,<class>,<count>,<median>,<p99>        the same from the references computed here
  reference,<class>,<largest relative difference from the table's REF>
"""
import sys
import warnings

import numpy as np
from astropy.io import fits


def polymul(a, b):
    """Products of batches of polynomials (coefficients in increasing powers, shape (M, k))."""
    out = np.zeros((a.shape[0], a.shape[1] + b.shape[1] - 1), dtype=complex)
    for i in range(a.shape[1]):
        out[:, i:i + b.shape[1]] += a[:, i:i + 1] * b
    return out


def magnifications(zeta, z1, z2, m1, m2):
    """Point-source magnification at the complex source positions `zeta` (1-D array)."""
    m = zeta.size
    ones = np.ones(m, dtype=complex)
    p = np.stack([z1 * z2 * ones, -(z1 + z2) * ones, ones], axis=1)
    lin1 = np.stack([-z2 * ones, ones], axis=1)
    lin2 = np.stack([-z1 * ones, ones], axis=1)
    zbar = np.conj(zeta)
    n1 = (zbar - np.conj(z1))[:, None] * p
    n2 = (zbar - np.conj(z2))[:, None] * p
    extra = np.zeros_like(p)
    extra[:, :2] = m1 * lin1 + m2 * lin2
    n1 += extra
    n2 += extra
    z_minus = np.stack([-zeta, ones], axis=1)
    poly = polymul(z_minus, polymul(n1, n2))
    poly[:, :5] -= polymul(p, m1 * n2 + m2 * n1)
    lead = poly[:, -1:]
    c = poly[:, :-1] / lead
    deg = c.shape[1]
    comp = np.zeros((m, deg, deg), dtype=complex)
    comp[:, 1:, :-1] = np.eye(deg - 1)
    comp[:, :, -1] = -c
    roots = np.linalg.eigvals(comp)
    powers = np.arange(poly.shape[1])
    for _ in range(3):
        zp = roots[:, :, None] ** powers
        f = np.einsum("mrk,mk->mr", zp, poly)
        df = np.einsum("mrk,mk->mr", zp[:, :, :-1], poly[:, 1:] * powers[1:])
        step = np.where(np.abs(df) > 0, f / np.where(df == 0, 1, df), 0)
        roots = roots - step
    z = roots
    resid = z - m1 / np.conj(z - z1) - m2 / np.conj(z - z2) - zeta[:, None]
    real = np.abs(resid) < 1e-7 * (1 + np.abs(zeta[:, None]))
    shear = m1 / np.conj(z - z1) ** 2 + m2 / np.conj(z - z2) ** 2
    det = 1 - np.abs(shear) ** 2
    return np.where(real, 1 / np.abs(det), 0).sum(axis=1)


def pixel_means(centres, side, subs, k, lens):
    """Mean magnification over squares of side `side` about `centres`, by `subs` x `subs`
    sub-squares of a k x k Gauss-Legendre rule each."""
    x, w = np.polynomial.legendre.leggauss(k)
    h = side / subs
    offsets = (np.arange(subs) + 0.5) * h - side / 2
    ox = (offsets[:, None] + 0.5 * h * x[None, :]).ravel()
    wx = np.tile(w, subs)
    dx, dy = np.meshgrid(ox, ox, indexing="ij")
    weights = np.outer(wx, wx).ravel() / (2 * subs) ** 2
    zeta = (centres[:, None] + (dx + 1j * dy).ravel()[None, :]).ravel()
    a = magnifications(zeta, *lens).reshape(centres.size, -1)
    return a @ weights


def summary(errors):
    if errors.size == 0:
        return "0,nan,nan"
    return f"{errors.size},{float(np.median(errors))!r},{float(np.percentile(errors, 99))!r}"


def main():
    path = sys.argv[1]
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        with fits.open(path) as hdul:
            hdul.verify("exception")
            for k, hdu in enumerate(hdul):
                print(f"checksum,{k},{hdu.verify_checksum()},{hdu.verify_datasum()}")
            h = hdul[0].header
            data = hdul[0].data.astype(np.float64)
            table = hdul["ERRSAMPL"].data
            ix, iy = table["IX"].astype(int), table["IY"].astype(int)
            near, ref = table["NEAR"].astype(bool), table["REF"].astype(np.float64)
    if h["LENS_N"] != 2:
        raise SystemExit("only binary lenses are recomputed here")
    lens = (complex(h["LENS1X"], h["LENS1Y"]), complex(h["LENS2X"], h["LENS2Y"]),
            h["LENS1M"], h["LENS2M"])
    side = h["CDELT1"]
    centres = (h["CRVAL1"] + ix * side) + 1j * (h["CRVAL2"] + iy * side)
    for cls, mask, subs, k in [("away", ~near, 1, 10), ("near", near, 12, 6)]:
        tag = "A" if cls == "away" else "C"
        count = h[f"ERRN_{tag}"]
        stated = f"{count},{h[f'ERRMED_{tag}']!r},{h[f'ERR99_{tag}']!r}" if count else "0,nan,nan"
        print(f"stated,{cls},{stated}")
        means = np.concatenate([pixel_means(centres[mask][i:i + 8], side, subs, k, lens)
                                for i in range(0, mask.sum(), 8)]) if mask.any() else np.array([])
        values = data[iy[mask], ix[mask]]
        print(f"numpy,{cls},{summary(np.abs(values - means) / means)}")
        diff = float(np.max(np.abs(means / ref[mask] - 1))) if mask.any() else 0.0
        print(f"reference,{cls},{diff!r}")


if __name__ == "__main__":
    main()
