"""O+ transport along the field: the discrete operator, the coupled column, the scenario
section. Each check names its external reference."""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest
from scipy.integrate import solve_bvp

import ionochem
from ionochem.environment.diffusion import (
    AMU_KG,
    K_B,
    M_OPLUS_AMU,
    ambipolar_diffusion_cm2_s,
    oplus_face_coefficients,
    plasma_scale_height_km,
)
from ionochem.solve.transport import transport_operator

ROOT = Path(__file__).resolve().parents[1]
MID = ROOT / "scenarios" / "midlatitude_equinox.toml"
G0, R_E = 9.80665, 6371.0


def _g(z_km):
    return G0 * (R_E / (R_E + z_km)) ** 2


def _equilibrium_profile(op, n0):
    """Solve T n = −s on levels 1..A−1 with n_0 given (the steady state without chemistry)."""
    T = op.T.toarray()
    A = T.shape[0]
    M = T[1:, 1:]
    rhs = -op.source[1:] - T[1:, 0] * n0
    n = np.empty(A)
    n[0] = n0
    n[1:] = np.linalg.solve(M, rhs)
    return n


@pytest.mark.parametrize("dip", [90.0, 35.0, -60.0])
def test_diffusive_equilibrium_has_the_plasma_scale_height(dip):
    """Isothermal plasma, no chemistry, no flux: n(z) = n0 exp(−∫ dz/H_p) with
    H_p = 2 k T/(m_O+ g(z)) and g ∝ 1/(R+z)², so ∫ m g/(2kT) dz =
    m g0 R²/(2kT) (1/(R+z0) − 1/(R+z)) (Schunk & Nagy 2009, §5.13; Rishbeth & Garriott
    1969, ch. 3). The dip angle scales D but not the equilibrium."""
    z = np.arange(200.0, 801.0, 10.0)
    T = np.full(z.shape, 1200.0)
    neutrals = {"O": 1e9 * np.exp(-(z - 200.0) / 60.0), "N2": 1e8 * np.exp(-(z - 200) / 35.0)}
    fc = oplus_face_coefficients(z, neutrals, T, T, T, dip_deg=dip)
    op = transport_operator(z, fc.D_cm2_s, fc.V_cm_s, 0.0)
    n = _equilibrium_profile(op, 1e5)
    m = M_OPLUS_AMU * AMU_KG
    R = R_E * 1e3
    expo = m * G0 * R ** 2 / (2 * K_B * 1200.0) * (1 / (R + z[0] * 1e3) - 1 / (R + z * 1e3))
    np.testing.assert_allclose(n, 1e5 * np.exp(-expo), rtol=2e-4)
    # and the scale height near 500 km is 2kT/(m g): about 650 km at 1200 K
    i = np.searchsorted(z, 500.0)
    H = -10.0 / np.log(n[i + 1] / n[i])
    assert H == pytest.approx(2 * K_B * 1200.0 / (m * _g(505.0)) / 1e3, rel=1e-3)


def test_temperature_gradient_term_matches_the_analytic_equilibrium():
    """With T_p(z) varying, Φ = 0 gives n T_p = const × exp(−∫ m g/(2 k T_p) dz)
    (the thermal-diffusion term of the ambipolar flux, Schunk & Nagy 2009, §5.13), checked
    against a quadrature of the exponent on a fine grid."""
    z = np.arange(200.0, 701.0, 5.0)
    Tp = 800.0 + 1200.0 * (1 - np.exp(-(z - 200.0) / 80.0))
    neutrals = {"O": 1e9 * np.exp(-(z - 200.0) / 60.0)}
    fc = oplus_face_coefficients(z, neutrals, Tp, Tp, Tp, dip_deg=90.0)
    n = _equilibrium_profile(transport_operator(z, fc.D_cm2_s, fc.V_cm_s, 0.0), 1e5)
    zf = np.linspace(200.0, 700.0, 20001)
    Tf = 800.0 + 1200.0 * (1 - np.exp(-(zf - 200.0) / 80.0))
    m = M_OPLUS_AMU * AMU_KG
    integrand = m * _g(zf) / (2 * K_B * Tf) * 1e3            # per km
    expo = np.concatenate([[0.0], np.cumsum(0.5 * (integrand[1:] + integrand[:-1])
                                            * np.diff(zf))])
    ref = 1e5 * 800.0 / Tf * np.exp(-expo)
    np.testing.assert_allclose(n, np.interp(z, zf, ref), rtol=3e-3)


def _chapman_column(column, z):
    """A linear O+ column: Chapman production, loss by N2 only, isothermal (invented)."""
    q = 1000.0 * np.exp(1 - (z - 250.0) / 50.0 - np.exp(-(z - 250.0) / 50.0))
    O = 1e10 * np.exp(-(z - 200.0) / 50.0)
    N2 = 1e9 * np.exp(-(z - 200.0) / 30.0)
    text = ("P1: O -> O+ + e | k = prescribed | ref = invented test\n"
            "R1: O+ + N2 -> NO+ + N | k = 1e-12 | ref = invented test\n"
            "R2: NO+ + e -> N + O | k = 4e-7 | ref = invented test\n")
    path = column(text, z, neutrals={"O": O, "N2": N2, "N": 1e6 + 0 * z}, Tn=1000.0,
                  production={"P1": q},
                  extra="[transport]\nspecies = [\"O+\"]\ndip_deg = 90.0\n")
    return path, q, O, N2


def test_chapman_layer_with_diffusion_matches_a_fine_scipy_solution(column):
    """Steady O+ with Chapman production q, linear loss β = k[N2] and ambipolar diffusion,
    lower boundary in photochemical equilibrium and no flux at the top, against
    scipy.integrate.solve_bvp on 4001 nodes of the same ODE:
    n' = −Φ/D − n/H_p, Φ' = q − β n (Schunk & Nagy 2009 §10.2; Rishbeth & Garriott 1969
    ch. 3). The model runs it through its coupled Newton solver on a 4 km grid."""
    z = np.arange(150.0, 650.1, 4.0)
    path, q, O, N2 = _chapman_column(column, z)
    model = ionochem.Model(ionochem.load_scenario(path))
    ds = model.solve()
    n_model = ds["density"].sel(species="O+").values

    T = 1000.0
    m = M_OPLUS_AMU * AMU_KG

    def coeffs(zz):
        nO = 1e10 * np.exp(-(zz - 200.0) / 50.0)
        nN2 = 1e9 * np.exp(-(zz - 200.0) / 30.0)
        D = ambipolar_diffusion_cm2_s({"O": nO, "N2": nN2, "N": 1e6 + 0 * zz}, T, T, T)
        Hp = 2 * K_B * T / (m * _g(zz)) * 100.0                 # cm
        qq = 1000.0 * np.exp(1 - (zz - 250.0) / 50.0 - np.exp(-(zz - 250.0) / 50.0))
        return D, Hp, qq, 1e-12 * nN2

    # Scaled unknowns (n / 1e5 cm-3, Φ / 1e9 cm-2 s-1, z in km) keep the BVP well posed.
    def rhs(zz, y):
        D, Hp, qq, beta = coeffs(zz)
        n, phi = y[0] * 1e5, y[1] * 1e9
        return np.vstack([(-phi / D - n / Hp) * 1e5 / 1e5, (qq - beta * n) * 1e5 / 1e9])

    _, _, q0, b0 = coeffs(np.array([z[0]]))

    def bc(ya, yb):
        return np.array([ya[0] - q0[0] / b0[0] / 1e5, yb[1]])

    zf = np.linspace(z[0], z[-1], 4001)
    flux = model.transport.operator.flux(n_model)
    guess = np.vstack([np.interp(zf, z, n_model) / 1e5, np.interp(zf, z, flux) / 1e9])
    sol = solve_bvp(rhs, bc, zf, guess, tol=1e-6, max_nodes=400000)
    assert sol.success, sol.message
    ref = sol.sol(z)[0] * 1e5
    np.testing.assert_allclose(n_model, ref, rtol=1e-2)
    # and the layer is a real F2 layer: a peak well above the production peak
    assert z[np.argmax(ref)] > 280.0


def test_without_transport_section_the_column_is_photochemical(column):
    """Without [transport] each level is in photochemical equilibrium: O+ = q/β exactly
    (the linear chemistry of the Chapman column), no coupling."""
    z = np.arange(150.0, 650.1, 20.0)
    path, q, O, N2 = _chapman_column(column, z)
    text = path.read_text()
    path.write_text(text[:text.index("\n[transport]\n")])
    model = ionochem.Model(ionochem.load_scenario(path))
    assert model.transport is None
    n = model.solve()["density"].sel(species="O+").values
    np.testing.assert_allclose(n, q / (1e-12 * N2), rtol=1e-9)


def test_upper_boundary_flux_feeds_the_column(column):
    """A downward flux at the top adds O+, and the finite volumes conserve it exactly:
    Σ β Δn Δz over the cells above the PCE bottom level = −Φ_top + ΔΦ through the bottom
    face (the continuity equation integrated over the column, Schunk & Nagy 2009 §10.2)."""
    z = np.arange(150.0, 650.1, 4.0)
    path, q, O, N2 = _chapman_column(column, z)
    base = ionochem.Model(ionochem.load_scenario(path)).solve()
    path.write_text(path.read_text() + "upper_boundary_flux_cm2_s = -1e8\n")
    fed = ionochem.Model(ionochem.load_scenario(path)).solve()
    dn = (fed["density"].sel(species="O+") - base["density"].sel(species="O+")).values
    assert np.all(dn >= -1e-6 * base["density"].sel(species="O+").values)
    beta = 1e-12 * N2
    w = np.full(z.shape, 4e5)
    w[0] = 0.0                    # the bottom level is held at PCE: not a control volume
    w[-1] = 2e5
    model = ionochem.Model(ionochem.load_scenario(path))
    flux = model.transport.operator.flux
    bottom = flux(fed["density"].sel(species="O+").values)[0] \
        - flux(base["density"].sel(species="O+").values)[0]
    assert abs(bottom) < 1e-3 * 1e8          # little of it reaches the bottom level
    assert np.sum(beta * dn * w) == pytest.approx(1e8 + bottom, rel=1e-7)


def _mid_with_transport(tmp_path, extra="", stop=600.0):
    text = MID.read_text().replace('"../reactions/', f'"{ROOT}/reactions/')
    text = re.sub(r"stop = [0-9.]+", f"stop = {stop}", text)
    if "[transport]" not in text:
        text += "\n[transport]\nspecies = [\"O+\"]\n"
    text += extra
    path = tmp_path / "mid.toml"
    path.write_text(text)
    return ionochem.load_scenario(path)


def test_day_column_has_an_f2_peak_in_the_published_range(tmp_path):
    """Noon, equinox, 40° N, F10.7 = 150: hmF2 within 250–350 km and NmF2 within
    5e5–3e6 cm-3 (mid-latitude daytime range from solar minimum to maximum; docs/physics.md §4a
    *(common practice)*; foF2 of 6–15 MHz by day, Davies 1990, *Ionospheric Radio*,
    *(from memory)*, NmF2 = 1.24e4 foF2²); the topside falls with roughly the plasma scale
    height; below 170 km the E and F1 regions stay within 5 % of the photochemical column."""
    scen = _mid_with_transport(tmp_path)
    model = ionochem.Model(scen)
    ds = model.solve()
    ne = ds["density"].sel(species="e")
    z = ds["altitude"].values
    i = int(np.argmax(ne.values))
    assert 250.0 <= z[i] <= 350.0
    assert 5e5 <= float(ne.max()) <= 3e6
    # topside: scale height of Ne over 450–550 km within a factor 1.5 of k(Te+Ti)/(m g)
    a, b = np.searchsorted(z, 450.0), np.searchsorted(z, 550.0)
    H = (z[b] - z[a]) / np.log(ne.values[a] / ne.values[b])
    Tp = ds["Te"].values[a:b + 1].mean() + ds["Ti"].values[a:b + 1].mean()
    Hp = K_B * Tp / (M_OPLUS_AMU * AMU_KG * _g(500.0)) / 1e3
    assert Hp / 1.5 < H < Hp * 1.5
    photo = ionochem.Model(scen.replace(transport=None)).solve()
    low = z <= 170.0
    for sp in ("e", "NO+", "O2+"):
        np.testing.assert_allclose(ds["density"].sel(species=sp).values[low],
                                   photo["density"].sel(species=sp).values[low], rtol=0.05)

    # The F2 peak forms where the O+ lifetime 1/β reaches the diffusion time H²/D, H the
    # scale height of the neutral gas (Rishbeth & Garriott 1969, ch. 3; Schunk & Nagy 2009
    # §10.2): the photochemical run's pce_doubtful flag (built on H_n) starts within 60 km
    # below the transported column's hmF2, while the plasma scale height (2–3 H_n) would
    # start it above the peak, where transport already rules.
    hmF2 = z[i]
    flag = photo["pce_doubtful"].sel(species="O+").values.astype(bool)
    flagged = z[np.argmax(flag & (z > 150))]
    assert hmF2 - 60.0 <= flagged <= hmF2
    env = model.environment
    Hp = plasma_scale_height_km(z, env.Te, env.Ti) * 1e5
    tau_plasma = Hp ** 2 / ambipolar_diffusion_cm2_s(env.neutrals, env.Te, env.Ti, env.Tn)
    life = photo["lifetime"].sel(species="O+").values
    assert z[np.argmax((life > tau_plasma) & (z > 150))] > hmF2


def test_sensitivities_with_transport_match_finite_differences(tmp_path):
    """Exact ∂ln n/∂ln k of the coupled column (one sparse factorisation) against central
    differences of two re-solved columns (k × e^(±1e-4)), the textbook check of an
    adjoint-free local sensitivity (docs/physics.md §6)."""
    scen = _mid_with_transport(tmp_path, stop=500.0)
    model = ionochem.Model(scen)
    ds = model.solve()
    sens = model.sensitivity(result=ds)
    h = 1e-4
    for rid in ("Oplus_N2",):
        up = model.with_changes(scale={rid: np.exp(h)}).solve()
        dn = model.with_changes(scale={rid: np.exp(-h)}).solve()
        for sp in ("O+", "e", "NO+"):
            fd = (np.log(up["density"].sel(species=sp)) - np.log(dn["density"].sel(species=sp))
                  ) / (2 * h)
            ex = sens["sensitivity"].sel(species=sp, reaction=rid)
            sel = {"altitude": [150.0, 250.0, 350.0, 450.0]}
            np.testing.assert_allclose(ex.sel(**sel).values, fd.sel(**sel).values,
                                       rtol=1e-4, atol=1e-6)
    # the O+ loss rate moves O+ at the top, where photochemistry alone would say -1 and
    # diffusion makes it far weaker
    top = float(sens["sensitivity"].sel(species="O+", reaction="Oplus_N2", altitude=450.0))
    assert -0.9 < top < 0.0


def test_transient_with_transport_stays_at_the_steady_state(tmp_path):
    """Integrated with solve_ivp (BDF, sparse column Jacobian) from the coupled steady state,
    the column stays there: f(n*) = 0 is a fixed point of the same equations."""
    scen = _mid_with_transport(tmp_path, stop=500.0)
    model = ionochem.Model(scen.replace(grid=type(scen.grid)(tuple(np.arange(90.0, 501, 10.0)))))
    ds = model.solve()
    out = model.integrate([0.0, 600.0, 3600.0], initial=ds)
    for sp in ("O+", "NO+", "e"):
        a = out["density"].sel(species=sp).isel(time=-1).values
        b = ds["density"].sel(species=sp).values
        np.testing.assert_allclose(a, b, rtol=1e-3, atol=1e-3 * b.max())


@pytest.mark.parametrize("extra, key, message", [
    ('species = ["NO+"]', "transport.species", "cannot be transported"),
    ('species = []', "transport.species", "non-empty"),
    ('species = ["O+", "O+"]', "transport.species", "twice"),
    ('dip_deg = 95.0', "transport.dip_deg", "between -90 and 90"),
    ('dip_deg = "steep"', "transport.dip_deg", "number"),
    ('meridional_wind_m_s = 5000.0', "transport.meridional_wind_m_s", "1000"),
    ('upper_boundary_flux_cm2_s = 1e20', "transport.upper_boundary_flux_cm2_s", "1e\\+12"),
    ('speed = 3', "transport.speed", "unknown key"),
])
def test_bad_transport_section_is_refused_at_its_key(tmp_path, extra, key, message):
    """Every malformed [transport] entry is a ScenarioError at its dotted key."""
    text = MID.read_text().replace('"../reactions/', f'"{ROOT}/reactions/')
    text = text[:text.index("\n[transport]\n")] + "\n[transport]\n" + extra + "\n"
    path = tmp_path / "bad.toml"
    path.write_text(text)
    with pytest.raises(ionochem.ScenarioError, match=message) as err:
        ionochem.load_scenario(path)
    assert err.value.key == key


def test_transport_without_place_needs_a_dip_angle(column):
    """A tabulated column has no place for the field model: dip_deg is then required."""
    z = np.arange(150.0, 650.1, 50.0)
    path, *_ = _chapman_column(column, z)
    path.write_text(path.read_text().replace("dip_deg = 90.0\n", ""))
    with pytest.raises(ionochem.ScenarioError, match="dip_deg") as err:
        ionochem.load_scenario(path)
    assert err.value.key == "transport.dip_deg"


def test_twilight_column_with_transport_solves_into_the_shadow(tmp_path):
    """Zenith angle near 104° with transport: the sunlit top and the dark levels below solve
    together; O+ diffuses down into the Earth's shadow (more O+ there than the scattered
    night-time sources alone keep in the photochemical column), and every density is
    finite and ≥ 0."""
    import datetime as dt

    from ionochem.environment.geometry import solar_zenith_angle_deg
    scen = _mid_with_transport(tmp_path, stop=600.0)
    t0 = np.datetime64(scen.time.utc.replace(tzinfo=None), "s")
    t = t0 + np.arange(0, 14 * 60).astype("timedelta64[m]")
    chi = solar_zenith_angle_deg(t, scen.location.latitude_deg, scen.location.longitude_deg)
    i = int(np.argmin(np.abs(chi - 104.0)))
    scen = scen.replace(time=type(scen.time)(utc=t[i].astype(dt.datetime)
                                             .replace(tzinfo=dt.UTC)))
    ds = ionochem.Model(scen).solve()
    dark = ds["dark"].values.astype(bool)
    assert dark.any() and not dark.all()
    assert np.all(ds["residual"].values <= 1e-10)
    d = ds["density"].values[ds["role"].values != "fixed"]
    assert np.all(np.isfinite(d)) and np.all(d >= 0)
    o = ds["density"].sel(species="O+").values
    z = ds["altitude"].values
    edge = z[dark].max()
    photo = ionochem.Model(scen.replace(transport=None)).solve()
    o_photo = photo["density"].sel(species="O+").values
    assert o[z == edge][0] > 1.5 * o_photo[z == edge][0]     # O+ diffuses into the shadow
    assert np.all(ds["density"].sel(species="e").values[z >= 300] > 0)


@pytest.mark.slow
def test_f_layer_decays_through_the_night_with_transport(tmp_path):
    """A transient run from a sunlit afternoon (15 LT) to local midnight with a moving sun
    and transport keeps a decaying F layer: NmF2 at midnight within 1e5–3e5 cm-3 and
    hmF2 within 250–400 km at mid latitude (docs/physics.md §4a, *common practice*;
    Rishbeth & Garriott 1969, ch. 7, *from memory*), while the E layer falls to what the
    scattered night-time sources keep, (1–4)e3 cm-3 near 110 km (Strobel, Opal & Meier 1980,
    Planet. Space Sci. 28, 1027)."""
    import datetime as dt

    from ionochem.io.scenario import Grid, Solve, Time
    scen = _mid_with_transport(tmp_path, stop=600.0)
    times = (0.0, 3 * 3600.0, 9 * 3600.0)
    scen = scen.replace(grid=Grid(tuple(np.arange(90.0, 600.1, 10.0))),
                        time=Time(dt.datetime(2025, 3, 20, 14, tzinfo=dt.UTC)),
                        solve=Solve(mode="transient", times_s=times, start="steady"))
    model = ionochem.Model(scen)
    out = model.integrate(np.array(times), initial=model.solve())
    assert out.attrs["transport"].startswith("O+")
    ne = out["density"].sel(species="e").isel(time=-1).values
    z = out["altitude"].values
    assert float(out["solar_zenith_angle"][-1]) > 120.0
    assert 1e5 <= ne.max() <= 3e5
    assert 250.0 <= z[np.argmax(ne)] <= 400.0
    assert 1e3 <= ne[z == 110.0][0] <= 4e3


def test_column_balance_closes_with_a_downward_boundary_flux():
    """A night-like column fed from above (upper-boundary flux −1e8 cm-2 s-1): the ion
    budget closes — column ionization + net transport inflow = recombination, to 1e-8 of
    the ionization — and the inflow is the divergence theorem's: the flux entering through
    the lowest transported face less the boundary flux (both from ``vertical_flux``)."""
    import dataclasses

    from ionochem.io.scenario import Grid
    root = Path(__file__).resolve().parents[1]
    base = ionochem.load_scenario(root / "scenarios" / "midlatitude_equinox.toml")
    scen = base.replace(grid=Grid(tuple(np.linspace(100.0, 600.0, 60))),
                        transport=dataclasses.replace(base.transport,
                                                      upper_boundary_flux_cm2_s=-1e8))
    ds = ionochem.Model(scen).solve()
    inflow = ds.attrs["column_transport_inflow_cm2_s"]
    flux = ds["vertical_flux"].values
    np.testing.assert_allclose(inflow, flux[0] - flux[-1], rtol=1e-9)
    assert inflow > 5e7
    assert abs(ds.attrs["column_balance"]) < 1e-8


def test_midnight_demo_keeps_a_night_f_layer_from_its_downward_flux():
    """The midnight demo (all dark, downward O+ flux 2e8 cm-2 s-1 through the top): an F
    layer with NmF2 of 5e4–5e5 cm-3 at hmF2 250–400 km, the range of mid-latitude midnight
    ionosonde values at moderate activity (foF2 2–6 MHz, hmF2 250–400 km *(from memory)*);
    without the flux the same column keeps no F layer (NmF2 below 1e4 cm-3)."""
    import dataclasses
    root = Path(__file__).resolve().parents[1]
    scen = ionochem.load_scenario(root / "scenarios" / "midlatitude_midnight.toml")
    assert scen.transport.upper_boundary_flux_cm2_s < 0

    def peak(s):
        ds = ionochem.Model(s).solve()
        e = ds["density"].sel(species="e").values
        z = ds["altitude"].values
        i = int(np.argmax(np.where(z > 150.0, e, 0.0)))
        return e[i], z[i]

    nm, hm = peak(scen)
    assert 5e4 <= nm <= 5e5 and 250.0 <= hm <= 400.0
    none = scen.replace(transport=dataclasses.replace(scen.transport,
                                                      upper_boundary_flux_cm2_s=0.0))
    assert peak(none)[0] < 1e4
