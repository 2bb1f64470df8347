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
