import sys
from pathlib import Path

# tests import their shared helpers as `helpers`
sys.path.insert(0, str(Path(__file__).parent))

import os
import shutil

import pytest


@pytest.fixture(scope="session")
def soffice():
    """Path of LibreOffice's soffice. Skips where it is absent, except in CI, where it must be there."""
    path = shutil.which("soffice") or shutil.which("libreoffice")
    if path is None:
        if os.environ.get("CI"):
            pytest.fail("LibreOffice (soffice) is required in CI; .ci/run installs it")
        pytest.skip("LibreOffice (soffice) is not installed on this machine")
    return path


def pytest_collection_modifyitems(config, items):
    # Every test that starts LibreOffice is slow (seconds each): the quick loop, `-m "not slow"`, leaves
    # them out without each test having to say so.
    for item in items:
        if "soffice" in getattr(item, "fixturenames", ()):
            item.add_marker(pytest.mark.slow)
            item.add_marker(pytest.mark.libreoffice)


# Property tests explore new random inputs on developers' machines; in CI they run a fixed
# sequence, so a green main stays green and a failure found locally is reproduced by its test.
from hypothesis import settings as _hypothesis_settings  # noqa: E402

_hypothesis_settings.register_profile("ci", derandomize=True)
if os.environ.get("CI"):
    _hypothesis_settings.load_profile("ci")
