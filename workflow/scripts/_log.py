"""Send a script's logging to its Snakemake log file and to the console."""
import logging
import sys


def setup(path):
    logging.basicConfig(level=logging.INFO, format="%(asctime)s %(name)s %(message)s",
                        handlers=[logging.FileHandler(path), logging.StreamHandler(sys.stderr)])
    return logging.getLogger("dienes")
