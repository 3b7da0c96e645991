"""Single points on GFN2-xTB structures at another level (dienes.singlepoints)."""
import numpy as np
import pytest

from dienes import singlepoints as refine
from dienes.backends import DFTLevel, DFTSettings, GFN2Level, LevelEnergy, dft_energy
from dienes.units import BOHR_ANGSTROM, HARTREE_KJMOL


def test_h2_hartree_fock_minimal_basis_matches_the_textbook():
    # H2 at R = 1.4 bohr, HF/STO-3G: E0 = -1.1167 hartree (Szabo & Ostlund, Modern Quantum
    # Chemistry, the worked H2 example; value recalled). Checks Angstrom in, kJ/mol out.
    r_A = 1.4 * BOHR_ANGSTROM
    e = dft_energy([1, 1], np.array([[0.0, 0.0, 0.0], [0.0, 0.0, r_A]]),
                   DFTSettings(method="hf", basis="sto-3g", density_fit=False))
    assert e.converged
    assert e.energy_kJmol / HARTREE_KJMOL == pytest.approx(-1.1167, abs=2e-4)


@pytest.mark.slow
def test_density_fitting_changes_an_energy_by_far_less_than_a_barrier_difference():
    # density fitting with the def2 universal fitting basis: errors of ~1e-5 hartree per atom
    # in total energies (Weigend, Phys. Chem. Chem. Phys. 2006, 8, 1057), i.e. well under
    # 0.1 kJ/mol for a small molecule; here on ethylene at a fixed geometry
    pos = np.array([[0.0, 0.0, 0.667], [0.0, 0.0, -0.667], [0.0, 0.923, 1.238], [0.0, -0.923, 1.238],
                    [0.0, 0.923, -1.238], [0.0, -0.923, -1.238]])
    numbers = [6, 6, 1, 1, 1, 1]
    exact = dft_energy(numbers, pos, DFTSettings(basis="def2-svp", density_fit=False, grid_level=3))
    fitted = dft_energy(numbers, pos, DFTSettings(basis="def2-svp", density_fit=True, grid_level=3))
    assert exact.converged and fitted.converged
    assert abs(fitted.energy_kJmol - exact.energy_kJmol) < 0.1


def test_level_from_the_config(config):
    levels = config.replace(levels={"gfn2": {"program": "xtb"}, "smd": {
        "program": "pyscf", "method": "b3lyp", "basis": "def2-svp", "dispersion": "none", "solvent": "1,4-dioxane"}},
        ranking={"levels": ["smd", "gfn2"]}).levels
    level = levels["smd"].dft_settings()
    assert level.dispersion is None and level.solvent == "1,4-dioxane" and level.density_fit
    assert levels["smd"].label() == "B3LYP/def2-SVP, SMD(1,4-dioxane)"
    assert isinstance(levels["smd"].energy_backend(), DFTLevel) and levels["gfn2"].places_atoms
    # the results folder is named by what changes a number: the barrier kind does not
    same = config.replace(levels=config.as_config()["levels"] | {"dft": {"program": "pyscf", "barrier": "electronic"}})
    assert same.levels["dft"].key() == config.levels["dft"].key() and same.levels["dft"].barrier == "electronic"


def test_sites_within_the_window_are_priced_lowest_first():
    ts = {"sites": {"a": {"status": "ok", "barrier_kJmol": 30.0, "positions_A": [[0, 0, 0]]},
                    "b": {"status": "ts_unverified", "barrier_kJmol": 20.0, "positions_A": [[0, 0, 0]]},
                    "c": {"status": "ok", "barrier_kJmol": 20.0 + refine.SITE_WINDOW_KJMOL + 1.0,
                          "positions_A": [[0, 0, 0]]},
                    "d": {"status": "not_located", "model_barrier_kJmol": 10.0}}}
    assert refine.sites_to_price(ts) == ["b", "a"]


@pytest.fixture(scope="module")
def butadiene_ethylene(structure_settings, config):
    from dienes.pipeline import backend_settings, compute_dienophile, compute_structure
    from dienes.transition import transition_states_for_structure
    res = compute_structure("C=CC=C", structure_settings)
    dph = compute_dienophile("C=C", structure_settings)
    ts = transition_states_for_structure(res, dph, backend_settings(structure_settings),
                                         config["transition_state"])
    return res, dph, ts


MINIMAL = DFTLevel(DFTSettings(method="b3lyp", basis="sto-3g"))


def _price(res, dph, ts, level):
    return refine.price_pair(refine.price_structure(res, level), ts, refine.price_dienophile(dph, level), level)


@pytest.mark.slow
def test_pricing_at_gfn2_reproduces_the_located_barrier(butadiene_ethylene, structure_settings, config):
    # plumbing check: the level interface, the choice of the lowest minimum and the geometries
    # handed over must give back the transition step's own GFN2-xTB barrier
    from dienes.pipeline import backend_settings
    from dienes.run import thermal_source
    res, dph, ts = butadiene_ethylene
    level = GFN2Level(backend_settings(structure_settings))
    thermal = thermal_source(config)
    priced = refine.price_structure(res, level, thermal)
    out = refine.price_pair(priced, ts, refine.price_dienophile(dph, level, thermal), level, thermal)
    site = next(iter(ts["sites"]))
    assert out["status"] == "ok" and out["level"] == "GFN2-xTB"
    assert out["sites"][site]["electronic_barrier_kJmol"] == pytest.approx(ts["sites"][site]["barrier_kJmol"],
                                                                           abs=0.01)
    # the free-energy barrier adds what association costs: measured gas-phase Diels-Alder A factors
    # (tests/data/gas_phase_kinetics.csv; butadiene + acrolein, Kistiakowsky & Lacher 1936) give
    # dS about -150 J/(mol K), so -T dS about +45 kJ/mol at 298 K, plus a few kJ/mol of zero-point
    # and thermal enthalpy; a lost partner or a sign error moves it far outside 35-65 kJ/mol
    assert 35.0 < out["sites"][site]["free_energy_barrier_kJmol"] - out["sites"][site]["electronic_barrier_kJmol"] < 65.0
    # the wavenumbers the saddle check stored are the saddle's own: a fresh Hessian agrees
    fresh = refine.thermal_correction_kJmol(ts["numbers"], ts["sites"][site]["positions_A"], thermal)
    assert out["sites"][site]["g_corr_ts_kJmol"] == pytest.approx(fresh, abs=0.05)


@pytest.mark.slow
def test_butadiene_ethylene_at_a_minimal_basis(butadiene_ethylene):
    res, dph, ts = butadiene_ethylene
    out = _price(res, dph, ts, MINIMAL)
    assert out["status"] == "ok", out["message"]
    site = next(iter(out["sites"]))
    barrier = out["sites"][site]["electronic_barrier_kJmol"]
    # measured Ea 108.9-112.2 kJ/mol for butadiene + butadiene and 108.9 for cyclohexadiene +
    # ethylene in the gas phase (Rowley & Steiner 1951; Huybrechts et al. 1980; NIST Chemical
    # Kinetics Database), so butadiene + ethylene lies near 110. STO-3G is no production level
    # (about 63 kJ/mol here): only a barrier above the GFN2-xTB one (far too low, ~30) and below
    # the measured activation energy is asked of it; a broken SCF or geometry gives hundreds
    assert ts["sites"][site]["barrier_kJmol"] + 15.0 < barrier < 115.0
    assert all(sp["converged"] for sp in out["single_points"])


@pytest.mark.slow
def test_an_scf_that_fails_gives_a_status_naming_the_structure(butadiene_ethylene):
    res, dph, ts = butadiene_ethylene

    class FailsOnBigMolecules:
        """Converges for the dienophile (6 atoms), fails for anything larger."""

        def label(self):
            return "test level"

        def as_dict(self):
            return {}

        def energy(self, numbers, positions_A):
            return LevelEnergy(0.0, len(numbers) < 7)

    level = FailsOnBigMolecules()
    dref = refine.price_dienophile(dph, level)
    assert dref["status"] == "ok"
    priced = refine.price_structure(res, level)
    assert priced["status"] == "scf_failed" and "diene minimum" in priced["message"]
    out = refine.price_pair(priced, ts, dref, level)
    assert out["status"] == "scf_failed" and out["message"].startswith("diene:")
    assert not out["sites"]


def test_a_mirror_image_minimum_is_recognised_and_a_different_one_is_not():
    # a reflection keeps every interatomic distance, and so does swapping two atoms of one kind
    # (the hydrogens of a methyl group); moving an atom does not (geometry)
    rng = np.random.default_rng(1)
    a = rng.normal(size=(8, 3))
    mirror = (a * np.array([-1.0, 1.0, 1.0]))[[0, 1, 2, 3, 4, 5, 7, 6]]
    other = a.copy()
    other[7] += [0.0, 0.5, 0.0]
    assert refine.mirror_twins([a, mirror, other]) == [0, 0, 2]
    # twins in geometry but not in energy stay apart
    assert refine.mirror_twins([a, mirror], [0.0, 1.0]) == [0, 1]


def test_only_minima_within_the_window_are_priced():
    # GFN2-xTB puts butadiene-like gauche conformers 8-10 kJ/mol up and B3LYP/def2-SVP 14-18 (demo,
    # docs/validation.md): minima above MINIMA_WINDOW_KJMOL are left out, the rest are priced
    calls = []

    class Counting:
        def label(self):
            return "counting level"

        def as_dict(self):
            return {}

        def energy(self, numbers, positions_A):
            calls.append(np.asarray(positions_A).copy())
            return LevelEnergy(float(np.sum(positions_A)), True)

    rng = np.random.default_rng(3)
    geometries = [rng.normal(size=(6, 3)) for _ in range(3)]
    structure = {"status": "ok", "key": "k", "minima_rel_kJmol": [0.0, refine.MINIMA_WINDOW_KJMOL - 1.0,
                                                                 refine.MINIMA_WINDOW_KJMOL + 1.0, 20.0],
                 "geometry": {"numbers": [6] * 6, "minimum_A": geometries[0].tolist(),
                              "low_minima_A": [g.tolist() for g in geometries]}}
    out = refine.price_structure(structure, Counting())
    assert out["status"] == "ok" and len(calls) == 2 and len(out["minima_kJmol"]) == 2
    assert np.allclose(calls[1], geometries[1])


ETHYLENE_POS_A = np.array([[0.0, 0.0, 0.667], [0.0, 0.0, -0.667], [0.0, 0.923, 1.238], [0.0, -0.923, 1.238],
                           [0.0, 0.923, -1.238], [0.0, -0.923, -1.238]])


@pytest.mark.slow
@pytest.mark.parametrize("method, xc, scale", [("b2plyp", "0.53*HF + 0.47*B88, 0.73*LYP", 0.27), ("scs-mp2", "HF", None)])
def test_second_order_methods_match_an_undensity_fitted_route(method, xc, scale):
    # The same energies along PySCF's conventional route (exact integrals, conventional MP2 with the
    # core frozen): B2PLYP = hybrid part + 0.27 E(MP2) on its orbitals (Grimme, J. Chem. Phys. 124,
    # 034108 (2006)); SCS-MP2 = HF + PySCF's own spin-scaled correlation (6/5 opposite, 1/3 same
    # spin; Grimme, J. Chem. Phys. 118, 9095 (2003)). Density fitting costs about 0.06 mHartree per
    # atom in the MP2 correlation energy (Weigend, Koehn and Haettig, J. Chem. Phys. 116, 3175
    # (2002); from memory), under 1.5 kJ/mol for ethylene; a wrong spin scale costs hundreds.
    from pyscf import dft, gto, mp
    ours = dft_energy([6, 6, 1, 1, 1, 1], ETHYLENE_POS_A, DFTSettings(method=method, basis="def2-svp", grid_level=3))
    mol = gto.M(atom=[(s, tuple(p)) for s, p in zip("CCHHHH", ETHYLENE_POS_A)], basis="def2-svp", verbose=0)
    mf = dft.RKS(mol)
    mf.xc, mf.grids.level = xc, 3
    e_scf = mf.kernel()
    pt = mp.MP2(mf, frozen=2).run()
    e_ref = e_scf + (scale * pt.e_corr if scale is not None else pt.emp2_scs)
    assert ours.converged
    assert ours.energy_kJmol == pytest.approx(e_ref * HARTREE_KJMOL, abs=1.5)


@pytest.fixture(scope="module")
def ethylene_pairs(structure_settings, config):
    """GFN2-xTB structures of butadiene and cyclopentadiene with ethylene (the pipeline's own)."""
    from dienes.pipeline import backend_settings, compute_dienophile, compute_structure
    from dienes.transition import transition_states_for_structure
    dph = compute_dienophile("C=C", structure_settings)
    out = {}
    for smiles in ("C=CC=C", "C1=CCC=C1"):
        res = compute_structure(smiles, structure_settings)
        out[smiles] = (res, transition_states_for_structure(res, dph, backend_settings(structure_settings),
                                                            config["transition_state"]))
    return dph, out


def _ethylene_barriers(ethylene_pairs, level) -> dict:
    dph, pairs = ethylene_pairs
    dph_priced = refine.price_dienophile(dph, level)
    barriers = {}
    for smiles, (res, ts) in pairs.items():
        out = refine.price_pair(refine.price_structure(res, level), ts, dph_priced, level)
        assert out["status"] == "ok", out.get("message")
        barriers[smiles] = min(s["electronic_barrier_kJmol"] for s in out["sites"].values() if s["status"] == "ok")
    return barriers


# Electronic barriers with ethylene from the s-trans diene, W1-F12/W2-F12 quality: butadiene 93.3,
# cyclopentadiene 75.3 kJ/mol, a gap of 18.0 (Karton and Goerigk, J. Comput. Chem. 36, 622 (2015), as
# collected in the GMTKN55 pericyclic subset, Goerigk et al., Phys. Chem. Chem. Phys. 19, 32184 (2017)).

@pytest.mark.slow
def test_a_double_hybrid_sizes_cyclopentadienes_advantage_over_butadiene(ethylene_pairs):
    # DSD-BLYP/def2-SVP on the pipeline's own GFN2-xTB structures: the gap within 3 kJ/mol and each
    # barrier within 8 (a double-zeta basis on approximate geometries); measured 18.6, 90.6 and 72.0
    level = DFTLevel(DFTSettings(method="dsd-blyp", basis="def2-svp"))
    b = _ethylene_barriers(ethylene_pairs, level)
    assert b["C=CC=C"] == pytest.approx(93.3, abs=8.0) and b["C1=CCC=C1"] == pytest.approx(75.3, abs=8.0)
    assert b["C=CC=C"] - b["C1=CCC=C1"] == pytest.approx(18.0, abs=3.0)


@pytest.mark.slow
def test_the_shipped_level_orders_the_pair_and_keeps_its_known_shortfall(ethylene_pairs, config):
    # known error, tested so that it cannot drift unseen: the shipped level gets the order right but
    # about half the size (9.8 kJ/mol on the benchmark's own geometries, the level comparison of
    # docs/validation.md; 10.0 on the pipeline's structures), which compresses every multiple of
    # butadiene the report shows; a gap outside 10 +/- 3 means the level or the structures changed
    level = config.ranking_levels[0].energy_backend()
    b = _ethylene_barriers(ethylene_pairs, level)
    assert b["C=CC=C"] - b["C1=CCC=C1"] == pytest.approx(10.0, abs=3.0)


@pytest.mark.slow
def test_the_diene_enters_the_free_energy_barrier_as_the_ensemble_of_its_minima(structure_settings, config):
    # 2-chlorobutadiene: s-trans and a pair of mirror-image gauche conformers (gauche minima of a
    # 2-substituted butadiene come as enantiomers: common practice). The diene's free energy is
    # -RT ln sum_i exp(-G_i / RT) over every minimum, each twin counted (statistical mechanics of a
    # conformer mixture; any text, e.g. McQuarrie, Statistical Mechanics), with G_i its energy at
    # the level plus its own thermal correction. Computed here by another route (scipy's logsumexp
    # over the minima as the structure file lists them, twins filled in by hand).
    from scipy.special import logsumexp
    from dienes.pipeline import backend_settings, compute_structure
    from dienes.run import thermal_source
    from dienes.units import rt_kjmol
    res = compute_structure("C=CC(Cl)=C", structure_settings)
    level = GFN2Level(backend_settings(structure_settings))
    thermal = thermal_source(config)
    out = refine.price_structure(res, level, thermal)
    twins = out["mirror_of"]
    assert len(twins) >= 3 and len(set(twins)) < len(twins)      # a gauche pair found and counted twice
    rt = rt_kjmol(thermal.temperature_K)
    geometries = res["geometry"]["low_minima_A"][:len(twins)]
    e = [level.energy(res["geometry"]["numbers"], g).energy_kJmol for g in geometries]
    g_corr = [refine.thermal_correction_kJmol(res["geometry"]["numbers"], geometries[twins[k]], thermal)
              for k in range(len(twins))]
    g = np.array(e) + np.array(g_corr)
    hand = -rt * logsumexp(-g / rt)
    assert out["free_energy_kJmol"] == pytest.approx(hand, abs=0.01)
    # the mixture lies below its best conformer by at most RT ln(number of minima)
    assert g.min() - rt * np.log(len(g)) - 1e-6 <= out["free_energy_kJmol"] <= g.min()


def test_the_shipped_ranking_rests_on_the_free_energy_barrier(config):
    # the first ranking level of the shipped config ranks by the free-energy barrier: its feature is
    # the site's free_energy_barrier_kJmol, not the electronic one (docs/validation.md, the choice)
    from dienes.ranking import level_features
    level = config.ranking_levels[0]
    assert not level.places_atoms and level.barrier == "free_energy"
    site = {"status": "ok", "electronic_barrier_kJmol": 40.0, "free_energy_barrier_kJmol": 95.0}
    f = level_features(level, {"status": "ok", "sites": {"1-2-3-4": site}}, "1-2-3-4")
    assert f[f"{level.name}_barrier_kJmol"] == 95.0 and f[f"{level.name}_electronic_barrier_kJmol"] == 40.0
