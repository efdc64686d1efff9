import numpy as np
import pytest


@pytest.fixture(autouse=True, scope="session")
def _isolated_cache(tmp_path_factory):
    """Every test session uses its own empty disk cache."""
    mp = pytest.MonkeyPatch()
    mp.setenv("LINEFINDER_CACHE_DIR", str(tmp_path_factory.mktemp("cache")))
    yield
    mp.undo()


@pytest.fixture
def rng():
    """A seeded generator, never a global seed."""
    return np.random.default_rng(20261202)
