"""The series tolerance is relative to the data's own scale (issue 10, audit item 3): the
same closed forms hold to the same relative accuracy whether the data are tiny or huge, and a
tiny known flux is not dropped beside a large ambient temperature.  Temperatures in kelvin."""

import numpy as np
import pytest
from scipy import special

from heatsight.data_io.cli import main
from heatsight.forward import Convection, Cylinder, CylinderModel, Flux, Insulated, Temperature

A, L, K = 0.15, 0.04, 16.0                    # radius [m], height [m], conductivity [W/(m K)]
LAM1 = special.jn_zeros(1, 1)[0]               # first zero of J_1 (scipy.special.jn_zeros)
R = np.array([0.0, 0.03, 0.075, 0.12, 0.15])
Z = np.array([0.0, 0.01, 0.02, 0.035, 0.04])
RR, ZZ = (x.ravel() for x in np.meshgrid(R, Z, indexing="ij"))
TH = np.linspace(0.0, 2.0 * np.pi, RR.size)


@pytest.mark.parametrize("scale", [1e-12, 1e-6, 1.0, 1e9])
def test_slab_with_a_flux_mode_at_any_data_scale(scale):
    """Bottom flux q0 (1 + J0(lam1 r / a)) in, top held at T0, side insulated.  Closed form
    (separation of variables; Carslaw & Jaeger, Conduction of Heat in Solids, ch. 8, from
    memory): T = T0 + q0 (L - z) / k + q0 a / (k lam1) J0(lam1 r / a) sinh(lam1 (L - z) / a)
    / cosh(lam1 L / a), lam1 a zero of J1 (so the mode carries no net heat and meets the
    insulated side)."""
    t0, q0 = 300.0 * scale, 2.0e4 * scale

    def flux(r, theta):
        return q0 * (1.0 + special.j0(LAM1 * np.asarray(r) / A))

    model = CylinderModel(Cylinder(A, L, K), {"bottom": Flux(flux), "top": Temperature(t0),
                                              "side": Insulated()})
    exact = (t0 + q0 * (L - ZZ) / K + q0 * A / (K * LAM1) * special.j0(LAM1 * RR / A)
             * np.sinh(LAM1 * (L - ZZ) / A) / np.cosh(LAM1 * L / A))
    got = model.temperature(RR, TH, ZZ)
    # relative to the field's own size, as the default tolerance (1e-8) promises
    assert np.max(np.abs(got - exact)) <= 1e-7 * np.max(np.abs(exact)), np.max(np.abs(got - exact) / exact)
    # the flux's own part (T - T0), which is 1 % of the field here, to the same relative accuracy
    assert np.max(np.abs((got - t0) - (exact - t0))) <= 1e-6 * np.max(np.abs(exact - t0))


@pytest.mark.parametrize("q, h", [(1e-4, 1e-6), (1e8, 1e6), (1e-9, 1e-11)])
def test_flux_in_convection_out_at_any_scale(q, h):
    """Plane wall, flux q in at the bottom, convection h to 20 degC at the top, side insulated:
    T = T_amb + q / h + q (L - z) / k (textbook plane wall; Incropera, Fundamentals of Heat and
    Mass Transfer, ch. 3, from memory).  q / h = 100 K in each case, while q a / k is 1e-6 K,
    1e6 K or 1e-11 K beside an ambient of 293 K: before, the tiny fluxes were dropped."""
    tamb = 293.15
    model = CylinderModel(Cylinder(A, L, K), {"bottom": Flux(q), "top": Convection(h, tamb),
                                              "side": Insulated()})
    exact = tamb + q / h + q * (L - ZZ) / K
    np.testing.assert_allclose(model.temperature(RR, TH, ZZ), exact, rtol=1e-9)


def test_simulate_keeps_a_tiny_flux(tmp_path, monkeypatch, capsys):
    """The audit's case through the command line: 1e-4 W/m^2 in, h = 0.01 W/(m^2 K) (the least
    the case file takes as plausible, data_io.limits) to 20 degC: the closed form above gives
    20.01 degC, to 1e-9 relative (20 degC was printed before; the audit's h = 1e-6 is now
    refused as an insulated face)."""
    (tmp_path / "case.toml").write_text(
        '[part]\nradius = "150 mm"\nheight = "40 mm"\nconductivity = "16 W/(m*K)"\n'
        '[faces.bottom]\ncondition = "flux"\nvalue = "1e-4 W/m^2"\n'
        '[faces.top]\ncondition = "convection"\nh = "1e-2 W/(m^2*K)"\nambient = "20 degC"\n'
        '[faces.side]\ncondition = "insulated"\n')
    (tmp_path / "points.csv").write_text("r [mm],theta [deg],z [mm]\n0,0,0\n75,90,20\n150,0,40\n")
    monkeypatch.chdir(tmp_path)
    assert main(["simulate", "case.toml", "--at", "points.csv"]) == 0
    lines = capsys.readouterr().out.strip().splitlines()
    temps = np.array([float(line.split(",")[3]) for line in lines[1:]])
    z = np.array([0.0, 0.02, 0.04])
    np.testing.assert_allclose(temps, 20.0 + 1e-4 / 1e-2 + 1e-4 * (L - z) / K, rtol=1e-9)
    assert np.all(temps > 20.0 + 0.99e-2)          # the flux is there
