import os

os.environ.setdefault("MPLBACKEND", "Agg")
os.environ.setdefault("OMP_NUM_THREADS", "1")

import pytest  # noqa: E402


@pytest.fixture
def store(tmp_path):
    from lcao.store import Store

    with Store(tmp_path / "store.sqlite") as st:
        yield st

try:  # property-based tests: the first example pays for importing PySCF, so no per-example deadline
    from hypothesis import settings

    settings.register_profile("lcao", deadline=None, derandomize=True)
    settings.load_profile("lcao")
except ImportError:  # pragma: no cover
    pass


def pytest_addoption(parser):
    parser.addoption("--slow", action="store_true", help="also run the long checks (large bases, extrapolations)")


def pytest_collection_modifyitems(config, items):
    """Long checks (marked slow) run only with --slow (scripts/test --slow); they are left out, not skipped."""
    if config.getoption("--slow"):
        return
    kept = [it for it in items if "slow" not in it.keywords]
    left = [it for it in items if "slow" in it.keywords]
    if left:
        config.hook.pytest_deselected(items=left)
        items[:] = kept
