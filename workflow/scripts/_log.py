"""Start of every workflow script: threads pinned to the rule's, logging to the job's log."""
import logging
import sys

from dienes.run import pin_threads


def setup(snakemake):
    pin_threads(snakemake.threads)
    logging.basicConfig(level=logging.INFO, format="%(asctime)s %(name)s %(message)s",
                        handlers=[logging.FileHandler(snakemake.log[0]), logging.StreamHandler(sys.stderr)])
    return logging.getLogger("dienes")
