#!/usr/bin/env python3
"""Physical scales of microlensing models with astropy.constants and astropy.units.

kappa = 4 G / (c^2 au) in mas per solar mass (Gould 2000, ApJ 542, 785: about 8.144);
theta_E = theta_star / rho, mu_rel = theta_E / tE, pi_rel = au (1/D_L - 1/D_S),
M = theta_E^2 / (kappa pi_rel), host M / (1 + q), companion q M / (1 + q) (in M_sun, M_jup and
M_earth of astropy.constants), projected separation s theta_E D_L. Angles through
astropy.units.dimensionless_angles; the year is astropy's (Julian, 365.25 d).

Columns: theta_star_uas, rho, tE_days, s, q, dl_kpc, ds_kpc (inputs), then kappa_mas_per_msun,
theta_E_mas, mu_rel_mas_per_yr, pi_rel_mas, mass_total_msun, mass_host_msun,
mass_companion_msun, mass_companion_mjup, mass_companion_mearth, separation_au.

`python3 physical_scales.py --check` compares with the committed physical_scales.csv.
"""
from pathlib import Path

import astropy.constants as const
import astropy.units as u

from refcheck import emit

HERE = Path(__file__).parent
ANGLES = u.dimensionless_angles()

# (theta_star uas, rho, tE days, s, q, D_L kpc, D_S kpc): invented events (bulge-like values).
CASES = [
    (0.6, 1e-3, 25.0, 1.2, 2e-3, 4.0, 8.0),
    (6.0, 2.5e-2, 40.0, 0.8, 1e-2, 6.5, 8.2),
    (0.45, 6e-4, 12.0, 1.05, 3e-5, 2.0, 7.5),
    (1.2, 4e-3, 80.0, 2.3, 0.3, 7.9, 8.0),
]


def kappa():
    return (4 * const.G / (const.c**2 * const.au)).to(u.mas / u.M_sun, ANGLES)


def row(theta_star, rho, te, s, q, dl, ds):
    k = kappa()
    theta_e = (theta_star * u.uas / rho).to(u.mas)
    mu = (theta_e / (te * u.day)).to(u.mas / u.yr)
    pi_rel = (const.au / (dl * u.kpc) - const.au / (ds * u.kpc)).to(u.mas, ANGLES)
    mass = (theta_e**2 / (k * pi_rel)).to(u.M_sun)
    companion = q * mass / (1 + q)
    sep = (s * theta_e * dl * u.kpc).to(u.au, ANGLES)
    return (
        theta_star, rho, te, s, q, dl, ds, k.value, theta_e.value, mu.value, pi_rel.value,
        mass.value, (mass / (1 + q)).value, companion.value, companion.to(u.M_jup).value,
        companion.to(u.M_earth).value, sep.value,
    )


def main():
    k = kappa().value
    assert abs(k - 8.144) < 1e-3, k  # Gould 2000
    header = [
        "theta_star_uas", "rho", "tE_days", "s", "q", "dl_kpc", "ds_kpc", "kappa_mas_per_msun",
        "theta_E_mas", "mu_rel_mas_per_yr", "pi_rel_mas", "mass_total_msun", "mass_host_msun",
        "mass_companion_msun", "mass_companion_mjup", "mass_companion_mearth", "separation_au",
    ]
    emit(HERE / "physical_scales.csv", header, [tuple(float(v) for v in row(*c)) for c in CASES])


if __name__ == "__main__":
    main()
