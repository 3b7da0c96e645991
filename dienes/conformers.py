"""Conformer generation: RDKit ETKDG (v3) embedding, MMFF94 optimisation, pruning.

Besides the free conformers, every flexible diene site gets force-field
structures with its dihedral held at 0 deg (planar s-cis: the starting points
for the constrained GFN2-xTB optimisations, so that substituent rotamers are
already relaxed in the s-cis state) and at 180 deg (s-trans), whose free
relaxations widen the pool towards both families.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from rdkit import Chem
from rdkit.Chem import AllChem, rdMolAlign, rdMolTransforms
from rdkit.Chem import rdForceFieldHelpers as ffh

from .units import KCALMOL_KJMOL

RESTRAINT_FORCE_KCALMOL = 200.0  # torsion restraint force constant in the force field (kcal/mol/rad^2)


@dataclass
class ConformerSettings:
    """n_conformers: ETKDG embeddings; seed: ETKDG random seed;
    energy_window_kJmol: force-field window kept (kJ/mol); rmsd_threshold_A:
    heavy-atom RMSD below which two conformers are duplicates (Angstrom);
    xtb_per_family: lowest conformers per s-cis/s-trans family passed to
    GFN2-xTB; planar_starts: planar s-cis starting rotamers per site."""

    n_conformers: int = 20
    seed: int = 20261201
    energy_window_kJmol: float = 30.0
    rmsd_threshold_A: float = 0.3
    xtb_per_family: int = 2
    planar_starts: int = 3


class ConformerError(RuntimeError):
    """No 3D structure could be embedded."""


def _force_field(mol: Chem.Mol, cid: int):
    if ffh.MMFFHasAllMoleculeParams(mol):
        props = ffh.MMFFGetMoleculeProperties(mol)
        return ffh.MMFFGetMoleculeForceField(mol, props, confId=cid), "MMFF94"
    return ffh.UFFGetMoleculeForceField(mol, confId=cid), "UFF"


def force_field_name(mol: Chem.Mol) -> str:
    return "MMFF94" if ffh.MMFFHasAllMoleculeParams(mol) else "UFF"


def relax(mol: Chem.Mol, cid: int, torsion=None, target_deg: float = 0.0,
          max_iters: int = 2000) -> float:
    """Force-field minimisation of conformer `cid` in place, optionally with a
    torsion (4 atom indices) restrained at `target_deg`. Returns the energy (kJ/mol)
    without the restraint term. Where the torsion's central bond is not in a ring
    the dihedral is first set by rotating one side, so the restraint only holds it."""
    if torsion is not None:
        try:
            rdMolTransforms.SetDihedralDeg(mol.GetConformer(cid), *map(int, torsion), target_deg)
        except (RuntimeError, ValueError):
            pass  # ring bond: the restraint walks it there
    ff, _ = _force_field(mol, cid)
    if torsion is not None:
        if force_field_name(mol) == "MMFF94":
            ff.MMFFAddTorsionConstraint(*map(int, torsion), False, target_deg, target_deg,
                                        RESTRAINT_FORCE_KCALMOL)
        else:
            ff.UFFAddTorsionConstraint(*map(int, torsion), False, target_deg, target_deg,
                                       RESTRAINT_FORCE_KCALMOL)
    ff.Initialize()
    ff.Minimize(maxIts=max_iters)
    pos = ff.Positions()
    ff_free, _ = _force_field(mol, cid)
    return float(ff_free.CalcEnergy(list(pos))) * KCALMOL_KJMOL


def embed(mol_h: Chem.Mol, settings: ConformerSettings) -> list[int]:
    """ETKDG v3 conformers with the configured seed; falls back to random coordinates."""
    params = AllChem.ETKDGv3()
    params.randomSeed = int(settings.seed)
    params.pruneRmsThresh = -1.0
    params.numThreads = 1
    cids = list(AllChem.EmbedMultipleConfs(mol_h, int(settings.n_conformers), params))
    if not cids:
        params.useRandomCoords = True
        cids = list(AllChem.EmbedMultipleConfs(mol_h, int(settings.n_conformers), params))
    if not cids:
        raise ConformerError("RDKit could not embed a 3D structure")
    return cids


def copy_conformer(mol: Chem.Mol, cid: int) -> int:
    conf = Chem.Conformer(mol.GetConformer(cid))
    return mol.AddConformer(conf, assignId=True)


def prune(mol: Chem.Mol, cids: list[int], energies_kJmol: dict[int, float],
          settings: ConformerSettings) -> list[int]:
    """Conformers within the energy window of the lowest, duplicates removed,
    sorted by energy."""
    if not cids:
        return []
    heavy = Chem.RemoveHs(mol)
    order = sorted(cids, key=lambda c: energies_kJmol[c])
    e_low = energies_kJmol[order[0]]
    kept: list[int] = []
    for cid in order:
        if energies_kJmol[cid] - e_low > settings.energy_window_kJmol:
            break
        if any(rdMolAlign.GetBestRMS(heavy, heavy, k, cid, maxMatches=20) < settings.rmsd_threshold_A
               for k in kept[-25:]):
            continue
        kept.append(cid)
    return kept


def positions(mol: Chem.Mol, cid: int) -> np.ndarray:
    return np.array(mol.GetConformer(cid).GetPositions())


def stereo_intact(mol: Chem.Mol, cid: int, reference_smiles: str) -> bool:
    """True when the 3D structure of conformer `cid` still has the stereo of
    `reference_smiles` (a force field can turn a double bond under strain)."""
    probe = Chem.Mol(mol, confId=cid)
    Chem.AssignStereochemistryFrom3D(probe, confId=cid)
    return Chem.MolToSmiles(Chem.RemoveHs(probe)) == reference_smiles
