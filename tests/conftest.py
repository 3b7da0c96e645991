import os

import pytest

os.environ.setdefault("OMP_NUM_THREADS", "1")

from dienes import settings as cfg  # noqa: E402

REPO = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


@pytest.fixture(scope="session")
def config():
    return cfg.load(os.path.join(REPO, "config", "config.yaml"))


@pytest.fixture(scope="session")
def shipped():
    """The shipped config as written (xtb-python), without the fallback a Python lacking
    xtb-python applies: for checks of what the shipped settings are, on any Python."""
    return cfg.load(os.path.join(REPO, "config", "config.yaml"), fallback=False)


@pytest.fixture(scope="session")
def structure_settings(config):
    return config.structure_settings()


from dienes.backends import available  # noqa: E402

# every backend importable here; xtb-python has no wheels past Python 3.11
BACKENDS = [b for b in ("xtb-python", "tblite") if available(b)]


@pytest.fixture(scope="session", params=BACKENDS)
def backend_settings(request, config):
    """Per-structure settings for each GFN2-xTB backend in turn."""
    return config.structure_settings() | {"backend": request.param}
