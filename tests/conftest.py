import os

import pytest

os.environ.setdefault("OMP_NUM_THREADS", "1")

from dienes import settings as cfg  # noqa: E402

REPO = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


@pytest.fixture(scope="session")
def config():
    return cfg.load(os.path.join(REPO, "config", "config.yaml"))


@pytest.fixture(scope="session")
def structure_settings(config):
    return cfg.structure_settings(config)


BACKENDS = ["xtb-python", "tblite"]
