import numpy as np
import pytest

from dienes.backends import SinglePoint
from dienes.orbitals import demand, regio_hint, site_frontier
from dienes.pipeline import compute_dienophile, compute_structure
from dienes.ranking import site_regio_hint


def test_demand_type_from_the_smaller_gap():
    # electron-rich diene (high HOMO) with an electron-poor dienophile (low LUMO): normal demand
    kind, normal, inverse = demand(-9.0, -6.0, -12.5, -10.0)
    assert kind == "normal" and normal == pytest.approx(-1.0) and inverse == pytest.approx(6.5)
    assert demand(-11.5, -8.5, -9.0, -5.0)[0] == "inverse"


def test_regio_rule():
    assert regio_hint((0.2, 0.4), (0.3, 0.1), (1, 4), (7, 8)) == "diene C4 to dienophile C7"
    assert regio_hint((0.3, 0.31), (0.3, 0.1), (1, 4), (7, 8)) == "symmetric"


def test_site_homo_skips_a_lone_pair():
    # toy system: atoms 0-3 are the diene; orbital 2 (the HOMO) lives on atom 4 (a lone pair)
    n_ao = 5
    coef = np.eye(n_ao)
    coef[:, 1] = [0.5, 0.5, 0.5, 0.5, 0.0]
    coef[:, 3] = [0.5, 0.5, -0.5, -0.5, 0.0]
    coef[:, 2] = [0, 0, 0, 0, 1.0]
    sp = SinglePoint(energy_eV=0.0, forces_eV_A=np.zeros((5, 3)),
                     orbital_energies_eV=np.array([-14.0, -11.0, -9.0, -2.0, 1.0]),
                     occupations=np.array([2.0, 2.0, 2.0, 0.0, 0.0]), coefficients=coef)
    numbers = [1, 1, 1, 1, 1]   # one AO per atom
    fr = site_frontier(sp, numbers, (0, 1, 2, 3))
    assert fr.homo_eV == -11.0 and fr.lumo_eV == -2.0
    assert fr.homo_share == pytest.approx(1.0)


@pytest.mark.slow
@pytest.mark.parametrize("diene,expected_terminus", [
    # frontier-orbital rule, common practice: 1-donor dienes give the "ortho" adduct,
    # 2-donor dienes the "para" adduct with acrolein
    ("CO/C=C/C=C", 6),      # (E)-1-methoxybutadiene: the CH2 terminus (atom 6) bonds acrolein's CH2
    ("C=CC(C)=C", 5),       # isoprene: the terminus next to the methyl-bearing carbon (atom 5)
    ("C=CC(=C)OC", 4),      # 2-methoxybutadiene: likewise (atom 4)
])
def test_regio_with_acrolein(diene, expected_terminus, backend_settings):
    acrolein = compute_dienophile("C=CC=O", backend_settings)
    assert acrolein["reactive_bond"] == [0, 1]
    assert acrolein["lumo_termini"][0] > acrolein["lumo_termini"][1]  # beta carbon (atom 1) larger
    site = compute_structure(diene, backend_settings)["sites"][0]
    assert site_regio_hint(site, acrolein, "normal") == f"diene C{expected_terminus} to dienophile C1"


@pytest.mark.slow
def test_symmetric_partner(backend_settings):
    ma = compute_dienophile("O=C1OC(=O)C=C1", backend_settings)
    assert ma["symmetric_bond"]
    site = compute_structure("CO/C=C/C=C", backend_settings)["sites"][0]
    assert site_regio_hint(site, ma, "normal") == "symmetric"
