from _log import setup

log = setup(snakemake)
from dienes.run import compute_dienophile  # noqa: E402

r = compute_dienophile(snakemake.input.manifest, snakemake.wildcards.dhash, snakemake.output[0])
log.info("dienophile %s: HOMO %.3f eV, LUMO %.3f eV", r["smiles"], r["homo_eV"], r["lumo_eV"])
