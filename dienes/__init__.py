"""Rank conjugated dienes by how readily they undergo a Diels-Alder cycloaddition."""

__version__ = "0.1.0"
