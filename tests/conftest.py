"""Shared test settings: hypothesis profiles (bounded by default; ``--hypothesis-profile=long``)."""

import os
import sys
from pathlib import Path

from hypothesis import HealthCheck, settings

settings.register_profile(
    "default", max_examples=100, deadline=None, suppress_health_check=[HealthCheck.too_slow]
)
settings.register_profile(
    "ci", max_examples=100, deadline=None, derandomize=True, suppress_health_check=[HealthCheck.too_slow]
)
settings.register_profile("long", max_examples=5000, deadline=None, suppress_health_check=list(HealthCheck))
settings.load_profile(os.environ.get("FXNET_HYPOTHESIS_PROFILE", "ci" if os.environ.get("CI") else "default"))

# test helpers shared by several test folders (e.g. the slow contract reference `fxref`)
sys.path.insert(0, str(Path(__file__).parent / "_support"))

# notebooks under tests/ are fixtures of the browser tests, not nbval regression notebooks
collect_ignore_glob = ["browser/*.ipynb"]
