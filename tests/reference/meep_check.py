#!/usr/bin/python3
"""Outside reference for lamina's optics, using Debian's python3-meep.

1. meep.materials cSi (Deinega et al. 2011 fit of Green & Keevers 1995) and
   fused_quartz (Malitson) against lamina's built-in Si and SiO2 models.
2. A 1-D FDTD of air / graphene / SiO2 (285 nm) / Si with meep's own Si and
   SiO2 media; graphene is a thin slab of D-conductivity sigma_D = pi*alpha/t
   (sheet y = sigma_D t), at t = 3, 2, 1 nm, extrapolated linearly to t -> 0.
   lamina predicts the same stack (meep's media written as n,k tables,
   universal sheet conductivity, normal incidence); the contrasts must agree
   within 1e-4.
Prints "N passed, N failed"; exit status 1 on any failure.
"""
import cmath, json, math, os, subprocess, sys, tempfile

import meep as mp
from meep.materials import cSi, fused_quartz

BUILD = sys.argv[1] if len(sys.argv) > 1 else "build"
LAMINA = os.path.join(BUILD, "lamina")
NK = os.path.join(BUILD, "tests", "nk_dump")
PI_ALPHA = math.pi * 7.2973525693e-3  # CODATA 2018
passed = failed = 0


def check(ok, what):
    global passed, failed
    if ok:
        passed += 1
    else:
        failed += 1
    print(("PASS " if ok else "FAIL ") + what, flush=True)


def nk_of(medium, wl_nm):
    eps = complex(medium.epsilon(1000.0 / wl_nm)[0, 0])
    n = cmath.sqrt(eps)
    return n.real, abs(n.imag)


def ours(material, wls):
    out = subprocess.run([NK, material] + [str(w) for w in wls], capture_output=True,
                         text=True, check=True).stdout.split("\n")
    return [tuple(float(x) for x in line.split()[1:]) for line in out if line]


def compare_materials():
    wls = list(range(450, 801, 25))
    for (w, (n, k)) in zip(wls, ours("Si", wls)):
        mn, mk = nk_of(cSi, w)
        check(abs(n - mn) <= 0.03 and abs(k - mk) <= max(0.005, 0.12 * mk),
              f"Si {w} nm: lamina {n:.4f}+{k:.4f}i vs meep cSi {mn:.4f}+{mk:.4f}i")
    for (w, (n, k)) in zip(wls, ours("SiO2", wls)):
        mn, mk = nk_of(fused_quartz, w)
        check(abs(n - mn) <= 1e-3, f"SiO2 {w} nm: lamina {n:.5f} vs meep fused_quartz {mn:.5f}")


def fdtd_reflectance(graphene_t_um, wls, resolution=1000):
    """R(lambda) of air/[slab]/SiO2/Si by 1-D FDTD, normalised by an empty run."""
    dpml, air, ox, si = 1.0, 1.0, 0.285, 1.5
    L = dpml + air + ox + si + dpml
    cell = mp.Vector3(0, 0, L)
    z0 = -L / 2
    top = z0 + dpml + air          # top of the oxide
    fcen, df = 1.8, 1.4
    src = [mp.Source(mp.GaussianSource(fcen, fwidth=df), component=mp.Ex,
                     center=mp.Vector3(0, 0, z0 + dpml + 0.2))]
    mon = mp.Vector3(0, 0, z0 + dpml + 0.5)
    freqs = [1000.0 / w for w in wls]

    def run(geometry):
        sim = mp.Simulation(cell_size=cell, resolution=resolution, dimensions=1,
                            boundary_layers=[mp.PML(dpml)], sources=src, geometry=geometry,
                            default_material=mp.air)
        fl = sim.add_flux(freqs, mp.FluxRegion(center=mon))
        return sim, fl

    sim, fl = run([])
    sim.run(until_after_sources=mp.stop_when_fields_decayed(20, mp.Ex, mon, 1e-9))
    inc = mp.get_fluxes(fl)
    inc_data = sim.get_flux_data(fl)
    sim.reset_meep()

    def structure(t):
        g = [mp.Block(size=mp.Vector3(mp.inf, mp.inf, ox), center=mp.Vector3(0, 0, top + ox / 2),
                      material=fused_quartz),
             mp.Block(size=mp.Vector3(mp.inf, mp.inf, si + dpml),
                      center=mp.Vector3(0, 0, top + ox + (si + dpml) / 2), material=cSi)]
        if t > 0:
            g.append(mp.Block(size=mp.Vector3(mp.inf, mp.inf, t), center=mp.Vector3(0, 0, top - t / 2),
                              material=mp.Medium(epsilon=1.0, D_conductivity=PI_ALPHA / t)))
        return g

    sim, fl = run(structure(graphene_t_um))
    sim.load_minus_flux_data(fl, inc_data)
    sim.run(until_after_sources=mp.stop_when_fields_decayed(20, mp.Ex, mon, 1e-9))
    refl = mp.get_fluxes(fl)
    sim.reset_meep()
    return [-r / i for r, i in zip(refl, inc)]


def lamina_contrast(wls, tmp):
    grid = [400 + i for i in range(421)]  # cSi is valid from 400 nm
    for name, med in (("si.csv", cSi), ("ox.csv", fused_quartz)):
        with open(os.path.join(tmp, name), "w") as f:
            f.write("wavelength_nm,n,k\n")
            for w in grid:
                n, k = nk_of(med, w)
                f.write(f"{w},{n:.9f},{k:.9f}\n")
    setup = {"schema": "lamina-setup/1", "objective": {"na": 0, "illumination_na": 0},
             "substrate": {"stack": [{"material": {"file": "ox.csv"}, "thickness_nm": 285}],
                           "base": {"file": "si.csv"}},
             "conductivity": {"model": "universal", "exciton": False}}
    path = os.path.join(tmp, "setup.json")
    with open(path, "w") as f:
        json.dump(setup, f)
    out = []
    for w in wls:
        r = subprocess.run([LAMINA, "predict", "--setup", path, "--wavelength", str(w),
                            "--layers", "1-1", "--format", "json"], capture_output=True, text=True,
                           check=True)
        out.append(json.loads(r.stdout)["rows"][0]["contrast"][0])
    return out


def compare_fdtd():
    wls = [470, 550, 630, 700]
    mp.verbosity(0)
    r_sub = fdtd_reflectance(0, wls)
    ts = [0.003, 0.002, 0.001]
    r_fl = [fdtd_reflectance(t, wls) for t in ts]
    with tempfile.TemporaryDirectory() as tmp:
        ours_c = lamina_contrast(wls, tmp)
    for j, w in enumerate(wls):
        cs = [(r_sub[j] - r[j]) / r_sub[j] for r in r_fl]
        # linear extrapolation to t = 0 from the two thinnest slabs
        c0 = cs[2] - (cs[1] - cs[2]) * ts[2] / (ts[1] - ts[2])
        check(abs(c0 - ours_c[j]) <= 1e-4,
              f"contrast {w} nm: FDTD {c0:.6f} (t=3,2,1 nm: {cs[0]:.6f} {cs[1]:.6f} {cs[2]:.6f}) "
              f"vs lamina {ours_c[j]:.6f}")


compare_materials()
compare_fdtd()
print(f"check-reference: {passed} passed, {failed} failed")
sys.exit(1 if failed else 0)
