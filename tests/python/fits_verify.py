"""Independent check of a causeway map file with astropy, called by tests/integration/fits.rs.

Usage: fits_verify.py FILE
       fits_verify.py --sums-only FILE...

Opens FILE with astropy.io.fits, runs the standard's verification, and prints, one record per
line:
  checksum,<verify_checksum()>,<verify_datasum()>
  header,<KEY>,<value as astropy parsed it>     for the causeway keywords
  world,<ix>,<iy>,<x>,<y>                       astropy.wcs world coordinates of 0-based pixels
  value,<ix>,<iy>,<pixel value>                 astropy's data[iy, ix]
Floats are printed with repr(), which reads back to the same double. With --sums-only (for
files corrupted on purpose, and for many files at once) only the checksum records are printed,
one per FILE in order.
"""
import sys
import warnings

from astropy.io import fits
from astropy.wcs import WCS

KEYS = ["WIN_XC", "WIN_YC", "WIN_SIDE", "WIN_PIX", "LENS_N", "ENGINE", "DENSITY",
        "RAYSHOT", "RAYSLAND", "CW_VERS", "DATE", "BUILDSEC", "BIN_S", "BIN_Q"]


def main():
    if sys.argv[1] == "--sums-only":
        for path in sys.argv[2:]:
            check(path, strict=False)
    else:
        check(sys.argv[1], strict=True)


def check(path, strict):
    with warnings.catch_warnings():
        # Any warning (a non-standard card, a WCS fix-up) is a failure.
        warnings.simplefilter("error")
        with fits.open(path) as hdul:
            if strict:
                hdul.verify("exception")
            hdu = hdul[0]
            print(f"checksum,{hdu.verify_checksum()},{hdu.verify_datasum()}")
            if not strict:
                return
            header = hdu.header
            for key in KEYS + [k for k in header if k.startswith("LENS") and k != "LENS_N"]:
                if key in header:
                    print(f"header,{key},{header[key]!r}")
            wcs = WCS(header)
            data = hdu.data
            ny, nx = data.shape
            for iy in range(ny):
                for ix in range(nx):
                    x, y = wcs.pixel_to_world_values(ix, iy)
                    print(f"world,{ix},{iy},{float(x)!r},{float(y)!r}")
                    print(f"value,{ix},{iy},{float(data[iy, ix])!r}")


if __name__ == "__main__":
    main()
