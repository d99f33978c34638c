import shutil
import sys
from pathlib import Path

import pytest
from hypothesis import HealthCheck, settings

sys.path.insert(0, str(Path(__file__).parent))

# Property tests are deterministic (the same examples on every machine and run) and never fail
# on the machine's speed: a fresh, loaded CI machine once failed the "input generation is slow"
# health check. Tests that set their own `suppress_health_check` list extend it explicitly.
settings.register_profile(
    "chainlint",
    derandomize=True,
    database=None,
    deadline=None,
    print_blob=False,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large,
                           HealthCheck.large_base_example],
)
settings.load_profile("chainlint")

DEMO = Path(__file__).parent.parent / "examples"


def demo_project(folder: Path, *files: str) -> Path:
    """A project folder holding the demo's committed profile store and the demo files named."""
    folder.mkdir(parents=True, exist_ok=True)
    shutil.copytree(DEMO / ".chainlint", folder / ".chainlint")
    for name in files:
        shutil.copy(DEMO / name, folder / name)
    return folder


@pytest.fixture
def project(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    """The demo's store and pipeline in a folder of their own (room beside it for files outside
    the project), which is the current folder."""
    folder = demo_project(tmp_path / "project", "pipeline.py")
    monkeypatch.chdir(folder)
    return folder


@pytest.fixture(scope="module")
def demo_store(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """A folder holding only the demo's store, shared by a module's tests (a language server's)."""
    return demo_project(tmp_path_factory.mktemp("demo"))
