"""Independent check of a refined causeway map file with astropy, called by
tests/integration/tiles.rs.

Usage: tiles_check.py FILE

Opens FILE with astropy.io.fits (any warning is a failure), runs the standard's verification
on every HDU, and prints, one record per line:
  checksum,<hdu index>,<verify_checksum()>,<verify_datasum()>   for every HDU
  tile,<EXTVER>,<TILE_BX>,<TILE_BY>,<placement>,<tile mean>,<base mean>
where placement is the largest distance, in base pixels, between where the tile's own WCS
(astropy.wcs) and the primary's put the centre of each tile pixel, against where the tiling
rule puts it (tile pixel i of block b at base pixel (b B - H) + (i + 1/2)/F - 1/2, with
F = REFINE, B = TILEBLK, H = TILEHALO); and the means are over the part of the tile's block
inside the window, from the tile's pixels and from the primary's. Floats with repr().
"""
import sys
import warnings

import numpy as np
from astropy.io import fits
from astropy.wcs import WCS


def main():
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        with fits.open(sys.argv[1]) as hdul:
            hdul.verify("exception")
            for k, hdu in enumerate(hdul):
                print(f"checksum,{k},{hdu.verify_checksum()},{hdu.verify_datasum()}")
            primary = hdul[0]
            base_wcs = WCS(primary.header)
            base = primary.data.astype(np.float64)
            n = base.shape[0]
            f, b, h = (primary.header[k] for k in ("REFINE", "TILEBLK", "TILEHALO"))
            for hdu in hdul[1:]:
                if hdu.header.get("EXTNAME") != "TILE":
                    continue
                bx, by = hdu.header["TILE_BX"], hdu.header["TILE_BY"]
                data = hdu.data.astype(np.float64)
                side = data.shape[0]
                j, i = np.mgrid[0:side, 0:side]
                x, y = WCS(hdu.header).pixel_to_world_values(i, j)
                px, py = base_wcs.world_to_pixel_values(x, y)
                ex = (bx * b - h) + (i + 0.5) / f - 0.5
                ey = (by * b - h) + (j + 0.5) / f - 0.5
                placement = float(max(np.abs(px - ex).max(), np.abs(py - ey).max()))
                x0, x1 = bx * b, min((bx + 1) * b, n)
                y0, y1 = by * b, min((by + 1) * b, n)
                core = data[(y0 - by * b + h) * f:(y1 - by * b + h) * f,
                            (x0 - bx * b + h) * f:(x1 - bx * b + h) * f]
                print(f"tile,{hdu.header['EXTVER']},{bx},{by},{placement!r},"
                      f"{float(core.mean())!r},{float(base[y0:y1, x0:x1].mean())!r}")


if __name__ == "__main__":
    main()
