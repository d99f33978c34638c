import sys
from pathlib import Path

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
