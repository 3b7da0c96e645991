"""Frontier orbitals of a diene site, demand type and the regioselectivity hint.

The site HOMO is the highest occupied orbital with at least PI_SHARE_MIN of its
density on the four diene carbons (so a lone pair on a substituent does not
stand in for the diene's pi orbital); the site LUMO likewise among the virtual
orbitals. GFN2-xTB orbital energies are shifted and compressed against
ionisation energies: they are regression features, never quoted as IPs.
"""

from __future__ import annotations

from dataclasses import dataclass


from .backends import SinglePoint, atom_orbital_weights

PI_SHARE_MIN = 0.25
SEARCH_DEPTH = 6  # orbitals looked at below the HOMO / above the LUMO


@dataclass
class Frontier:
    """homo_eV, lumo_eV: site frontier orbital energies (eV); homo_share, lumo_share:
    fraction of each orbital on the four diene atoms; homo_termini, lumo_termini:
    orbital weight on C1 and C4 (for the regioselectivity hint)."""

    homo_eV: float
    lumo_eV: float
    homo_share: float
    lumo_share: float
    homo_termini: tuple[float, float]
    lumo_termini: tuple[float, float]


def site_frontier(sp: SinglePoint, numbers, atoms) -> Frontier:
    atoms = list(atoms)
    h = sp.homo_index
    n_mo = len(sp.orbital_energies_eV)

    def pick(candidates, fallback):
        for j in candidates:
            w = atom_orbital_weights(sp, numbers, j)
            if w[atoms].sum() >= PI_SHARE_MIN:
                return j, w
        return fallback, atom_orbital_weights(sp, numbers, fallback)

    j_homo, w_homo = pick(range(h, max(-1, h - SEARCH_DEPTH), -1), h)
    j_lumo, w_lumo = pick(range(h + 1, min(n_mo, h + 1 + SEARCH_DEPTH)), min(h + 1, n_mo - 1))
    return Frontier(
        homo_eV=float(sp.orbital_energies_eV[j_homo]),
        lumo_eV=float(sp.orbital_energies_eV[j_lumo]),
        homo_share=float(w_homo[atoms].sum()),
        lumo_share=float(w_lumo[atoms].sum()),
        homo_termini=(float(w_homo[atoms[0]]), float(w_homo[atoms[3]])),
        lumo_termini=(float(w_lumo[atoms[0]]), float(w_lumo[atoms[3]])),
    )


def demand(diene_homo_eV: float, diene_lumo_eV: float,
           dienophile_homo_eV: float, dienophile_lumo_eV: float) -> tuple[str, float, float]:
    """(demand type, normal gap (eV), inverse gap (eV)); the smaller gap names the type."""
    normal = dienophile_lumo_eV - diene_homo_eV
    inverse = diene_lumo_eV - dienophile_homo_eV
    return ("normal" if normal <= inverse else "inverse"), normal, inverse


def regio_hint(diene_termini: tuple[float, float], dienophile_termini: tuple[float, float],
               site_label: tuple[int, int], dienophile_label: tuple[int, int],
               tolerance: float = 0.1) -> str:
    """Frontier-orbital rule: the larger diene terminus bonds the larger dienophile carbon.

    Weights are orbital densities at the termini; when either partner's two
    weights differ by less than `tolerance` (relative), 'symmetric' is returned.
    Labels are 1-based atom numbers of the molecule as given.
    """
    d1, d4 = diene_termini
    e1, e2 = dienophile_termini
    if abs(d1 - d4) <= tolerance * max(d1, d4) or abs(e1 - e2) <= tolerance * max(e1, e2):
        return "symmetric"
    big_d = site_label[0] if d1 > d4 else site_label[1]
    big_e = dienophile_label[0] if e1 > e2 else dienophile_label[1]
    return f"diene C{big_d} to dienophile C{big_e}"
