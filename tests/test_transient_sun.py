"""Photo rates follow the sun in transient runs, and the two solvers agree with each other."""

from __future__ import annotations

from pathlib import Path

import numpy as np

import ionochem

ROOT = Path(__file__).resolve().parents[1]
SUNSET = ROOT / "scenarios" / "midlatitude_sunset.toml"


def _coarse(scen, step=20.0):
    alt = tuple(np.arange(100.0, 400.0 + 1e-9, step))
    return scen.replace(grid=type(scen.grid)(altitude_km=alt))


# An invented isothermal column (exponential O, N2, O2 with their own scale heights) at an
# invented site in the afternoon, so the zenith angle runs from about 45 to 80 degrees.
ISO_ALT = np.arange(120.0, 400.0 + 1e-9, 40.0)
ISO = {"O": (2e11, 120.0, 55.0), "N2": (4e11, 120.0, 30.0), "O2": (5e10, 120.0, 26.0)}
ISO_LIST = """\
PI_O4S: O -> O+ + e | k = photo | ref = invented test
PI_O2D: O -> O+(2D) + e | k = photo | ref = invented test
PI_O2P: O -> O+(2P) + e | k = photo | ref = invented test
R1: O+ + e -> O | k = 1e-12 | ref = invented test
R2: O+(2D) + e -> O+ + e | k = 1e-7 | ref = invented test
R3: O+(2P) + e -> O+ + e | k = 1e-7 | ref = invented test
"""
ISO_SITE = (35.0, -20.0, "2025-06-10T17:00:00")


def _iso_density(name, z_km):
    n0, z0, h = ISO[name]
    return n0 * np.exp(-(np.asarray(z_km) - z0) / h)


def _astropy_sun(utc, lat, lon):
    """Geometric zenith angle (deg) and (1 AU / r)^2 from astropy (bundled data only)."""
    import warnings

    import astropy.units as u
    from astropy.coordinates import AltAz, EarthLocation, get_sun
    from astropy.time import Time
    from astropy.utils import iers

    with iers.conf.set_temp("auto_download", False), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        t = Time(utc, scale="utc")
        sun = get_sun(t)
        loc = EarthLocation.from_geodetic(lon * u.deg, lat * u.deg, 0 * u.m)
        alt = sun.transform_to(AltAz(obstime=t, location=loc, pressure=0 * u.hPa)).alt.deg
        return 90.0 - float(alt), 1.0 / float(sun.distance.to_value(u.au)) ** 2


def _slant_column_cm2(name, z_km, chi_deg, radius_km=6371.0):
    """Column along the straight ray to the sun through spherical shells, by scipy quad
    (geometry of e.g. Smith & Smith 1972, J. Geophys. Res. 77, 3592): r(s)^2 = r0^2 + s^2
    + 2 r0 s cos(chi)."""
    from scipy.integrate import quad

    r0 = radius_km + z_km
    c = np.cos(np.radians(chi_deg))

    def n(s):
        return _iso_density(name, np.sqrt(r0 * r0 + s * s + 2 * r0 * s * c) - radius_km)

    h = ISO[name][2]
    val, _ = quad(n, 0.0, 80 * h / max(c, 0.05), limit=400, epsabs=0, epsrel=1e-10)
    return val * 1e5


def _reference_o_ionization(z_km, utc):
    """Total O photoionization frequency (s-1) written out from outside sources:
    (1 AU/r)^2 sum_i F_i sigma_O,i exp(-sum_s sigma_abs,s,i N_s), with F the published EUVAC
    flux (tests/reference), sigma the plain columns of the packaged Fennelly & Torr table,
    N_s the quad slant columns and chi, r from astropy."""
    from _oracles import euvac_reference_flux, raw_cross_sections

    lat, lon, _ = ISO_SITE
    chi, dist = _astropy_sun(utc, lat, lon)
    raw = raw_cross_sections()
    flux = euvac_reference_flux(150.0, 145.0) * dist
    tau = sum(raw[f"{s}_abs"] * 1e-18 * _slant_column_cm2(s, z_km, chi) for s in ISO)
    return float(np.sum(flux * raw["O_abs"] * 1e-18 * np.exp(-tau))), chi


def test_transient_photo_rates_equal_an_independent_sun_at_each_time(column):
    """The O photoionization rate coefficients of a transient column at times t (on the 60 s
    lattice and between its nodes) equal an independent calculation for the sun at the
    scenario time + t: astropy's zenith angle and distance, slant columns integrated with
    scipy quad through spherical shells, the published EUVAC flux and the plain cross-section
    columns (none of the model's geometry, slant or photo code). To 0.5 % on the lattice and
    1 % between nodes (linear interpolation over 60 s), at levels where the rate exceeds
    1e-3 of the top value."""
    import datetime as _dt

    lat, lon, t0 = ISO_SITE
    neutrals = {s: _iso_density(s, ISO_ALT) for s in ISO}
    extra = (f"[location]\nlatitude_deg = {lat}\nlongitude_deg = {lon}\n"
             f"[time]\nutc = {t0}Z\n[sun]\nf107 = 150.0\nf107a = 145.0\n"
             "[photons]\nsecondary = false\nsoft_xrays = false\nnight_sources = false\n"
             '[solve]\nmode = "transient"\ntimes_s = [0.0, 3600.0, 7200.0]\n')
    path = column(ISO_LIST, ISO_ALT, neutrals=neutrals, Tn=800.0, extra=extra, name="iso")
    model = ionochem.Model(ionochem.load_scenario(path))
    ids = [model.reactions.index(r) for r in ("PI_O4S", "PI_O2D", "PI_O2P")]
    start = _dt.datetime.fromisoformat(t0)
    chis = []
    for t, rtol in ((0.0, 5e-3), (1800.0, 5e-3), (5400.0, 5e-3), (1830.0, 1e-2),
                    (6210.0, 1e-2)):
        utc = (start + _dt.timedelta(seconds=t)).isoformat()
        ref = np.array([_reference_o_ionization(z, utc)[0] for z in ISO_ALT])
        chis.append(_reference_o_ionization(ISO_ALT[-1], utc)[1])
        got = model.rate_coefficients(t)[:, ids].sum(axis=1)
        big = ref > 1e-3 * ref.max()
        assert big.sum() >= 4
        np.testing.assert_allclose(got[big], ref[big], rtol=rtol, err_msg=f"t = {t} s")
    assert 40.0 < chis[0] < chis[2] < 85.0       # the sun sinks over the run


def test_integration_from_steady_state_stays_there_under_a_fixed_sun():
    """Started at the Newton steady state with a sun that does not move, solve_ivp (BDF)
    keeps the densities to 1e-6 relative over a day of model time (two independent solvers
    agreeing on the same equilibrium)."""
    scen = _coarse(ionochem.load_scenario(SUNSET))
    steady = scen.replace(solve=type(scen.solve)())
    model = ionochem.Model(steady)
    ds = model.solve()
    out = model.integrate([3600.0, 86400.0], initial=ds, rtol=1e-10, atol=1e-8)
    for s in model.species:
        n0 = ds["density"].sel(species=s).values
        n1 = out["density"].sel(species=s).values[-1]
        big = n0 > 1e-6 * n0.max()
        np.testing.assert_allclose(n1[big], n0[big], rtol=1e-6)
