from _log import setup
from dienes.run import dienophile

log = setup(snakemake.log[0])
r = dienophile(dict(snakemake.config), snakemake.params.smiles, snakemake.output[0])
log.info("dienophile %s: HOMO %.3f eV, LUMO %.3f eV", r["smiles"], r["homo_eV"], r["lumo_eV"])
