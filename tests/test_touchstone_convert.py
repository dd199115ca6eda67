"""S <-> Z, Y, H, G conversions and the version 1 normalisation.

Oracles: worked values from Pozar, Microwave Engineering, 4th ed., ch. 2 (Gamma =
(Z - Z0)/(Z + Z0)), and scikit-rf's s2z/z2s, s2y/y2s, s2h/h2s, s2g/g2s (tests only).
"""

from __future__ import annotations

import numpy as np
import pytest
import skrf as rf

from acquire.touchstone import parse_touchstone
from acquire.touchstone.convert import from_s, normalisation, to_s

SKRF = {"Z": (rf.network.s2z, rf.network.z2s), "Y": (rf.network.s2y, rf.network.y2s),
        "H": (rf.network.s2h, rf.network.h2s), "G": (rf.network.s2g, rf.network.g2s)}


@pytest.mark.parametrize(("z", "gamma"), [
    (950 / 13 + 200j / 13, 0.2 + 0.1j),     # Pozar ch. 2 worked example, Z0 = 50
    (25.0, -1 / 3), (100.0, 1 / 3), (50 + 50j, 0.2 + 0.4j),
])
def test_one_port_z_to_gamma_worked_values(z, gamma):
    s = to_s(np.array([[[z]]]), "Z", [50.0])
    assert s[0, 0, 0] == pytest.approx(gamma, abs=1e-15)
    assert from_s(s, "Z", [50.0])[0, 0, 0] == pytest.approx(z, rel=1e-14)
    assert to_s(np.array([[[1 / z]]]), "Y", [50.0])[0, 0, 0] == pytest.approx(gamma, abs=1e-15)


@pytest.mark.parametrize(("parameter", "ports"), [("Z", 1), ("Z", 3), ("Y", 2), ("Y", 4),
                                                  ("H", 2), ("G", 2)])
def test_conversions_agree_with_skrf_for_per_port_references(parameter, ports):
    rng = np.random.default_rng(ports)
    s = 0.3 * (rng.normal(size=(7, ports, ports)) + 1j * rng.normal(size=(7, ports, ports)))
    z0 = rng.uniform(20, 120, size=ports)
    s2p, p2s = SKRF[parameter]
    p = from_s(s, parameter, z0)
    np.testing.assert_allclose(p, s2p(s, np.broadcast_to(z0, (7, ports))), rtol=1e-12)
    np.testing.assert_allclose(to_s(p, parameter, z0), s, atol=1e-13)
    np.testing.assert_allclose(p2s(p, np.broadcast_to(z0, (7, ports))), s, atol=1e-13)


def test_normalisation_of_z_matches_the_specification_example():
    # TS2.0: a one-port Z of 74.25 ohm with R 75 is stored as 0.99 in version 1
    assert 74.25 * normalisation("Z", [75.0], 1)[0, 0] == pytest.approx(0.99, rel=1e-15)


def test_normalisation_of_y_and_h_g_single_reference():
    # y = Y*R (Pozar ch. 2 normalised admittance); H: h11/R, h22*R, h12 h21 unitless
    assert normalisation("Y", [50.0], 1)[0, 0] == pytest.approx(50.0)
    np.testing.assert_allclose(normalisation("H", [50.0, 50.0], 2), [[1 / 50, 1], [1, 50]])
    np.testing.assert_allclose(normalisation("G", [50.0, 50.0], 2), [[50, 1], [1, 1 / 50]])


@pytest.mark.parametrize("parameter", ["H", "G"])
def test_version_2_h_and_g_files_read_to_skrf_s(parameter):
    # TS2.0: H and G are 2-port only and absolute in version 2
    rng = np.random.default_rng(1)
    s = 0.3 * (rng.normal(size=(3, 2, 2)) + 1j * rng.normal(size=(3, 2, 2)))
    p = SKRF[parameter][0](s, np.full((3, 2), 50.0))
    pairs = [" ".join(f"{float(v.real)!r} {float(v.imag)!r}" for v in p[k].ravel())
             for k in range(3)]
    rows = "".join(f"{k + 1} {pairs[k]}\n" for k in range(3))
    text = (f"[Version] 2.0\n# GHz {parameter} RI R 50\n[Number of Ports] 2\n"
            f"[Two-Port Data Order] 12_21\n[Number of Frequencies] 3\n[Network Data]\n"
            f"{rows}[End]\n")
    f = parse_touchstone(text)
    assert f.parameter == parameter
    np.testing.assert_allclose(f.to_sweep().s, s, atol=1e-13)


def test_version_1_y_file_is_y_times_r():
    # y = 1 is a matched load, y = 2 is Z = 25 ohm: Gamma = -1/3 (Pozar ch. 2)
    f = parse_touchstone("# MHz Y RI R 50\n915 1 0\n2450 2 0\n", ports=1)
    np.testing.assert_allclose(f.data[:, 0, 0], [0.02, 0.04])
    np.testing.assert_allclose(f.to_sweep().s[:, 0, 0], [0, -1 / 3], atol=1e-15)
