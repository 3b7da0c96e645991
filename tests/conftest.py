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


def ase_calculator(backend: str):
    """The GFN2-xTB library's own ASE calculator, an independent route past the project's backend
    layer (dienes.backends) for checks of it."""
    if backend == "xtb-python":
        from xtb.ase.calculator import XTB
        return XTB(method="GFN2-xTB")
    from tblite.ase import TBLite
    return TBLite(method="GFN2-xTB", verbosity=0)


@pytest.fixture(scope="session")
def reference_seed(tmp_path_factory):
    """GFN2-xTB results of the workflow tests' reference dienes and of butadiene with maleic
    anhydride, at the workflow tests' small conformer settings, computed once per test session
    and shared by its workers (a file lock): a workflow test copies them into its directory
    instead of computing them again. Tests that count what a first run computes, or kill a run
    after its first result, start without them."""
    import fcntl

    import yaml

    from dienes import run

    from .test_workflow import _setup
    base = tmp_path_factory.getbasetemp()
    root = (base.parent if os.environ.get("PYTEST_XDIST_WORKER") else base) / "reference_seed"
    root.mkdir(exist_ok=True)
    with open(root.parent / "reference_seed.lock", "w") as lock:
        fcntl.flock(lock, fcntl.LOCK_EX)
        if not (root / "done").exists():
            _setup(root, [("seed", "C=CC=C", "")])
            conf = yaml.safe_load((root / "config" / "config.yaml").read_text())
            conf |= {"library": str(root / "lib.csv"), "reference": str(root / "config" / "reference.csv"),
                     "ranking": {"levels": ["gfn2"]}}
            manifest = root / "manifest.json"
            run.prepare(cfg.resolve(conf), manifest, results=root / "results")
            for _, step in run.plan_steps(manifest, root / "results"):
                step()
            (root / "done").touch()
    return root / "results"
