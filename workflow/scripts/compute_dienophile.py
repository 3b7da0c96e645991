from _log import setup

log = setup(snakemake)
from dienes.run import dienophile  # noqa: E402

r = dienophile(dict(snakemake.config), snakemake.params.smiles, snakemake.output[0])
log.info("dienophile %s: HOMO %.3f eV, LUMO %.3f eV", r["smiles"], r["homo_eV"], r["lumo_eV"])
