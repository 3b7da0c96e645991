from _log import setup

log = setup(snakemake)
from dienes.run import torsion_profiles  # noqa: E402

p = torsion_profiles(snakemake.input.manifest, snakemake.input.ranking, snakemake.output[0])
log.info("torsion profiles: %s", ", ".join(x["label"] for x in p["profiles"]) or "none (no freely rotating diene)")
