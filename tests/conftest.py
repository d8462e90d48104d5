import os

import matplotlib

matplotlib.use("Agg")

try:
    from hypothesis import settings

    settings.register_profile("ci", max_examples=40, deadline=None, derandomize=True)
    settings.register_profile("dev", max_examples=25, deadline=None)
    settings.load_profile("ci" if os.environ.get("CI") else "dev")
except ImportError:  # pragma: no cover
    pass
