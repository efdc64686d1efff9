"""Bundled sample spectra: five invented scenarios with real physics.

Each scenario computes its hydrogenic lines with `build_catalogue`, adds
non-hydrogenic lines, continuum, instrumental broadening and noise from a
seeded generator, and writes the file with a ground-truth JSON beside it.
The scenarios are demonstrations, not observations.

* emission_galaxy.fits: star-forming galaxy at z = 0.1836, log-linear FITS
  image (vacuum), inverse variance and mask extensions, Balmer lines with a
  Case B decrement, [O II], [O III], [N II], [S II], [O I], He I, night-sky
  residuals at fixed observed wavelengths and a cosmic-ray hit.
* hot_star.fits: A-type star, FITS binary table (air), broad Balmer
  absorption with Stark wings, He I and Mg II, interstellar Ca II K at rest,
  radial velocity +37.5 km/s.
* hd_discharge.csv: hydrogen/deuterium glow discharge in room air, two
  spectrometer windows: H-alpha/D-alpha isotope pair and a Stark-broadened
  H-beta (with D-beta), a C II impurity line.
* xray_cluster.fits: hot cluster gas at z = 0.0183 on a keV axis: Lyman-alpha
  doublets of S XVI, Ar XVIII, Ca XX and Fe XXVI, He-like Fe XXV, Poisson counts.
* radio_rrl.csv: H, He and C recombination lines near 5 GHz (H109α, He109α,
  C109α, H137β) at v_LSR = +42.5 km/s (radio convention), antenna temperature.
"""

import json
from pathlib import Path

import numpy as np
from astropy import units as u
from astropy.io import fits

from ..catalogue.build import build_catalogue
from ..catalogue.companions import COMPANION_LINES
from ..features.profiles import GAUSS_FWHM
from ..spectral.doppler import C_KMS
from ..spectral.medium import air_to_vacuum, vacuum_to_air

__all__ = ["write_samples", "SAMPLES", "sample_path"]

SAMPLES = ("emission_galaxy.fits", "hot_star.fits", "hd_discharge.csv", "xray_cluster.fits",
           "radio_rrl.csv")

# Non-hydrogenic rest wavelengths, vacuum Å (`companions`, NIST ASD) and night-sky lines (air Å)
NEBULAR_NAMES = ("[O II] 3727", "[O II] 3730", "[Ne III] 3869", "[O III] 4364", "[O III] 4960",
                 "[O III] 5008", "He I 5877", "[O I] 6302", "[N II] 6550", "[N II] 6585",
                 "[S II] 6718", "[S II] 6733")
NEBULAR_VAC = {name: COMPANION_LINES[name][0] for name in NEBULAR_NAMES}
SKY_AIR = {"[O I] 5577 sky": 5577.339, "Na D2 sky": 5889.950, "[O I] 6300 sky": 6300.304,
           "[O I] 6364 sky": 6363.776, "OH 7913 sky": 7913.71, "OH 8399 sky": 8399.17}


def sample_path(name):
    """Path of a bundled sample inside the installed package."""
    from importlib import resources

    return Path(str(resources.files("linefinder").joinpath("data/samples").joinpath(name)))


def _gauss(x, c, fwhm):
    return np.exp(-4 * np.log(2) * ((x - c) / fwhm) ** 2)


def _voigt_norm(x, c, fwhm_g, fwhm_l):
    from scipy.special import voigt_profile

    s, g = fwhm_g / GAUSS_FWHM, fwhm_l / 2
    return voigt_profile(x - c, s, g) / voigt_profile(0.0, s, g)


def _truth_line(kind, species, label, rest, observed, unit, amplitude, medium, **extra):
    return {"kind": kind, "species": species, "label": label, "rest": rest, "observed": observed,
            "unit": unit, "amplitude": amplitude, "medium": medium, **extra}


def _galaxy(rng):
    z = 0.1836
    R = 2000.0
    npix = 4200
    lam0, lam1 = 3700.0, 9300.0
    dlog = np.log(lam1 / lam0) / (npix - 1)
    lam = lam0 * np.exp(dlog * np.arange(npix))
    cont = 2.0 + 0.6 * (lam / 6000.0) ** -1.5
    flux = cont.copy()
    truth = []
    # Case B Balmer decrement at 10^4 K, n_e = 100 cm^-3 (Storey & Hummer 1995), E(B-V) ~ 0.1
    case_b = {3: 2.86, 4: 1.0, 5: 0.468, 6: 0.259, 7: 0.159, 8: 0.105, 9: 0.0731, 10: 0.0530}
    hb_peak = 6.0
    cat = build_catalogue("H", 2, (3, 10), z=z)
    for row in cat:
        nu = int(row["n_upper"])
        obs = row["wavelength_vacuum"].to_value(u.AA)
        redden = (obs / 5890.0) ** -0.35
        amp = hb_peak * case_b[nu] * redden
        fwhm = obs / R * 1.15
        flux += amp * _gauss(lam, obs, fwhm)
        truth.append(_truth_line("emission", "H I", str(row["label"]),
                                 row["rest_wavelength_vacuum"].to_value(u.AA), obs, "Angstrom", amp,
                                 "vacuum", n_lower=2, n_upper=nu))
    strengths = {"[O II] 3727": 3.0, "[O II] 3730": 3.6, "[Ne III] 3869": 0.9, "[O III] 4364": 0.15,
                 "[O III] 4960": 3.9, "[O III] 5008": 11.6, "He I 5877": 0.6, "[O I] 6302": 0.5,
                 "[N II] 6550": 2.0, "[N II] 6585": 6.1, "[S II] 6718": 2.4, "[S II] 6733": 1.8}
    for name, rest in NEBULAR_VAC.items():
        obs = rest * (1 + z)
        amp = strengths[name]
        flux += amp * _gauss(lam, obs, obs / R * 1.15)
        truth.append(_truth_line("emission", "other", name, rest, obs, "Angstrom", amp, "vacuum"))
    for name, air in SKY_AIR.items():
        vac = air_to_vacuum(air * u.AA).to_value(u.AA)
        amp = rng.choice([-1, 1]) * rng.uniform(0.8, 1.6)
        flux += amp * _gauss(lam, vac, vac / R)
        truth.append(_truth_line("sky residual", "sky", name, vac, vac, "Angstrom", amp, "vacuum"))
    sigma = 0.02 * np.sqrt(flux / 2.0) * 5
    obs_flux = flux + rng.normal(0, sigma)
    cosmic = 1710
    obs_flux[cosmic] += 9.0
    ivar = 1 / sigma ** 2
    mask = np.zeros(npix, dtype=np.int16)
    mask[2999:3003] = 1
    ivar[2999:3003] = 0.0
    hdr = fits.Header()
    hdr["OBJECT"] = "Demo galaxy (invented)"
    hdr["CTYPE1"] = "WAVE-LOG"
    hdr["CUNIT1"] = "Angstrom"
    hdr["CRPIX1"] = 1.0
    hdr["CRVAL1"] = lam0
    hdr["CDELT1"] = lam0 * dlog
    hdr["BUNIT"] = "1e-17 erg/s/cm2/A"
    hdr["SPEC_RES"] = (R, "resolving power lambda / FWHM")
    hdr["COMMENT"] = "linefinder sample spectrum; an invented scenario for demonstrations"
    hdul = fits.HDUList([fits.PrimaryHDU(obs_flux.astype(np.float32), header=hdr),
                         fits.ImageHDU(ivar.astype(np.float32), name="IVAR"),
                         fits.ImageHDU(mask, name="MASK")])
    meta = {"scenario": "star-forming galaxy", "z": z, "medium": "vacuum", "resolution": R,
            "cosmic_ray_pixel": cosmic, "masked_pixels": [2999, 3002]}
    return hdul, meta, truth


def _hot_star(rng):
    v = 37.5
    R = 5000.0
    lam = np.arange(3820.0, 5020.0, 0.25)          # air Å
    cont = (lam / 4500.0) ** -2.2
    flux = cont.copy()
    truth = []
    cat = build_catalogue("H", 2, (4, 11), velocity=v * u.km / u.s)
    widths = {4: 24.0, 5: 22.0, 6: 20.0, 7: 17.0, 8: 14.0, 9: 12.0, 10: 10.0, 11: 8.0}
    depth = {4: 0.55, 5: 0.56, 6: 0.55, 7: 0.52, 8: 0.48, 9: 0.44, 10: 0.40, 11: 0.35}
    absorb = np.zeros_like(lam)
    for row in cat:
        nu = int(row["n_upper"])
        obs = row["wavelength_air"].to_value(u.AA)
        prof = depth[nu] * _voigt_norm(lam, obs, 1.5, widths[nu])
        absorb += prof
        truth.append(_truth_line("absorption", "H I", str(row["label"]),
                                 float(vacuum_to_air(row["rest_wavelength_vacuum"]).to_value(u.AA)),
                                 obs, "Angstrom", -depth[nu], "air", n_lower=2, n_upper=nu,
                                 lorentz_fwhm=widths[nu]))
    others = {"He I 4471": (4471.48, 0.10, v), "Mg II 4481": (4481.13, 0.18, v),
              "Ca II K (interstellar)": (3933.66, 0.30, 0.0)}
    for name, (rest, d, vel) in others.items():
        obs = rest * (1 + vel / C_KMS)
        absorb += d * _gauss(lam, obs, obs / R * (1.3 if vel else 1.0))
        truth.append(_truth_line("absorption", "other", name, rest, obs, "Angstrom", -d, "air"))
    flux = cont * np.exp(-absorb)
    sigma = cont / 120.0
    obs_flux = flux + rng.normal(0, sigma)
    cols = [fits.Column(name="WAVELENGTH", format="D", unit="Angstrom", array=lam),
            fits.Column(name="FLUX", format="E", unit="erg/s/cm2/A", array=obs_flux),
            fits.Column(name="IVAR", format="E", array=1 / sigma ** 2)]
    tab = fits.BinTableHDU.from_columns(cols, name="SPECTRUM")
    tab.header["AIRORVAC"] = "air"
    tab.header["SPEC_RES"] = R
    prim = fits.PrimaryHDU()
    prim.header["OBJECT"] = "Demo A star (invented)"
    meta = {"scenario": "hot star", "velocity_kms": v, "velocity_convention": "optical",
            "medium": "air", "resolution": R}
    return fits.HDUList([prim, tab]), meta, truth


def _discharge(rng):
    windows = [(484.0, 488.5), (654.8, 658.2)]
    step = 0.002
    lam = np.concatenate([np.arange(a, b, step) for a, b in windows])   # air nm
    inst = 0.008                                                          # instrument FWHM, nm
    flux = np.full_like(lam, 5.0)
    truth = []
    ne = 2.0e20   # m^-3
    # Stark FWHM of H-beta ~ 4.8 nm (ne / 1e23 m^-3)^0.68 (Gigosos & Cardenoso 1996 fit; common practice)
    stark_hb = 4.8 * (ne / 1e23) ** 0.68
    dh = 0.35
    for sp, scale in (("H", 1.0), ("D", dh)):
        cat = build_catalogue(sp, 2, (3, 4), medium="air")
        for row in cat:
            obs = row["wavelength_air"].to_value(u.nm)
            nu = int(row["n_upper"])
            doppler = obs * (2.2e-5 if sp == "H" else 1.6e-5)          # ~0.4 eV neutrals
            if nu == 3:
                amp = 900.0 * scale
                prof = _gauss(lam, obs, np.hypot(doppler, inst))
            else:
                amp = 160.0 * scale
                prof = _voigt_norm(lam, obs, np.hypot(doppler, inst), stark_hb)
            flux += amp * prof
            truth.append(_truth_line("emission", "H I" if sp == "H" else "D I", str(row["label"]),
                                     obs, obs, "nm", amp, "air", n_lower=2, n_upper=nu,
                                     stark_fwhm_nm=stark_hb if nu == 4 else None))
    flux += 40.0 * _gauss(lam, 657.805, inst * 1.2)
    truth.append(_truth_line("emission", "other", "C II 6578", 657.805, 657.805, "nm", 40.0, "air"))
    sigma = np.sqrt(flux) * 0.6
    obs_flux = flux + rng.normal(0, sigma)
    lines = ["# Demo H/D glow discharge (invented scenario), spectrometer in room air",
             "# medium: air", "# resolution: 70000",
             f"# electron density used for the H-beta Stark width: {ne:.2e} m^-3",
             "wavelength [nm],intensity,sigma"]
    lines += [f"{a:.4f},{b:.3f},{c:.3f}" for a, b, c in zip(lam, obs_flux, sigma)]
    meta = {"scenario": "H/D discharge", "medium": "air", "electron_density_m3": ne,
            "hbeta_stark_fwhm_nm": stark_hb, "d_to_h_intensity": dh, "windows_nm": windows}
    return "\n".join(lines) + "\n", meta, truth


def _xray(rng):
    z = 0.0183
    e = np.arange(2.0, 8.0, 0.002)                   # keV bin centres
    fwhm = 0.006                                     # keV, microcalorimeter-like
    kt = 5.0
    cont = 60.0 * (e / 2.0) ** -0.4 * np.exp(-(e - 2.0) / kt)
    model = cont.copy()
    truth = []
    amps = {"S XVI": 60.0, "Ar XVIII": 45.0, "Ca XX": 30.0, "Fe XXVI": 40.0}
    for sp, amp in amps.items():
        cat = build_catalogue(sp, 1, 2, fine=True, z=z)
        for row in cat:
            obs = row["energy"].to_value(u.keV)
            w = amp * (2 / 3 if row["j_upper"] == 1.5 else 1 / 3) * 1.5
            model += w * _gauss(e, obs, fwhm)
            truth.append(_truth_line("emission", sp, f"{row['label']} {row['transition']}",
                                     (row["rest_wavelength_vacuum"]).to("keV", u.spectral()).value,
                                     obs, "keV", w, "vacuum", n_lower=1, n_upper=2))
    fe25 = 6.7004 / (1 + z)
    model += 40.0 * _gauss(e, fe25, fwhm)
    truth.append(_truth_line("emission", "other", "Fe XXV w", 6.7004, fe25, "keV", 40.0, "vacuum"))
    counts = rng.poisson(model).astype(float)
    err = np.sqrt(np.maximum(counts, 1.0))
    cols = [fits.Column(name="ENERGY", format="D", unit="keV", array=e),
            fits.Column(name="COUNTS", format="D", unit="ct", array=counts),
            fits.Column(name="STAT_ERR", format="D", unit="ct", array=err)]
    tab = fits.BinTableHDU.from_columns(cols, name="SPECTRUM")
    tab.header["SPEC_RES"] = (6.7 / fwhm, "E / FWHM at 6.7 keV")
    prim = fits.PrimaryHDU()
    prim.header["OBJECT"] = "Demo cluster (invented)"
    meta = {"scenario": "X-ray cluster", "z": z, "fwhm_kev": fwhm}
    return fits.HDUList([prim, tab]), meta, truth


def _radio(rng):
    v = 42.5
    f = np.arange(4995.0, 5025.0, 0.03)              # MHz
    temp = np.zeros_like(f)
    truth = []
    lines = [("H", 109, 110, 0.50, 25.0), ("He", 109, 110, 0.045, 20.0), ("C", 109, 110, 0.06, 6.0),
             ("H", 137, 139, 0.14, 25.0)]
    for sp, nl, nu, amp, width_kms in lines:
        cat = build_catalogue(sp, nl, nu, velocity=v * u.km / u.s, velocity_convention="radio")
        obs = cat["frequency"][0].to_value(u.MHz)
        rest = cat["rest_wavelength_vacuum"][0].to("MHz", u.spectral()).value
        fwhm = rest * width_kms / C_KMS
        temp += amp * _gauss(f, obs, fwhm)
        truth.append(_truth_line("emission", {"H": "H I", "He": "He I", "C": "C I"}[sp],
                                 str(cat["label"][0]), rest, obs, "MHz", amp, "vacuum",
                                 n_lower=nl, n_upper=nu, fwhm_kms=width_kms))
    baseline = 0.002 * np.sin((f - 4995.0) / 30.0 * np.pi)
    sigma = 0.004
    t_obs = temp + baseline + rng.normal(0, sigma, len(f))
    out = ["# Demo radio recombination line spectrum (invented), antenna temperature",
           f"# velocity (LSR, radio convention): {v} km/s",
           "freq(MHz),T_A(K)"]
    out += [f"{a:.4f},{b:.5f}" for a, b in zip(f, t_obs)]
    meta = {"scenario": "radio recombination lines", "velocity_kms": v,
            "velocity_convention": "radio", "noise_K": sigma}
    return "\n".join(out) + "\n", meta, truth


_BUILDERS = {"emission_galaxy.fits": (_galaxy, 11), "hot_star.fits": (_hot_star, 12),
             "hd_discharge.csv": (_discharge, 13), "xray_cluster.fits": (_xray, 14),
             "radio_rrl.csv": (_radio, 15)}


def write_samples(folder, *, names=SAMPLES):
    """Write the sample spectra and their ground truth (``NAME.truth.json``) into `folder`."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    written = []
    for name in names:
        builder, seed = _BUILDERS[name]
        data, meta, truth = builder(np.random.default_rng(seed))
        path = folder / name
        if isinstance(data, str):
            path.write_text(data)
        else:
            data.writeto(path, overwrite=True, checksum=False)
        meta["lines"] = truth
        meta["note"] = "invented scenario for demonstrations; positions computed by linefinder"
        (folder / f"{name}.truth.json").write_text(json.dumps(meta, indent=1, ensure_ascii=False))
        written.append(path)
    return written
