"""Hypothesis profiles of the property tests.

The default profile ("vicino-ci") keeps the whole property suite within about
a minute on two cores: 50 examples per test, 2 s per example at most, no
example database (nothing is written into the work tree; a failure prints the
blob that replays it with ``@reproduce_failure``).

Environment variables:

* ``VICINO_PROPERTY_EXAMPLES``: examples per test (raise it for a longer
  local run, for example ``VICINO_PROPERTY_EXAMPLES=2000``);
* ``VICINO_HYPOTHESIS_PROFILE``: another profile: ``vicino-long`` (1,000
  examples per test, with an example database under ``.hypothesis/``) or
  ``vicino-debug`` (verbose, 10 examples);
* ``VICINO_PROPERTY_STRICT=1``: also run the parts of properties that are
  held back while a known vicino bug is open (see ``_strategies.open_bug``),
  so that they fail until the bug is fixed.

The shared strategies and oracles live in ``_strategies.py`` and
``_oracles.py`` beside this file (imported by module name, like
``tests/reference/_shapes.py``), not here: a test module that imports
``conftest`` can get another directory's conftest once there are several.
"""

from __future__ import annotations

import os
from datetime import timedelta

from hypothesis import HealthCheck, Verbosity, settings

_SLOW_DATA = [HealthCheck.too_slow, HealthCheck.data_too_large, HealthCheck.filter_too_much]

settings.register_profile(
    "vicino-ci",
    max_examples=int(os.environ.get("VICINO_PROPERTY_EXAMPLES", "50")),
    deadline=timedelta(seconds=2),
    database=None,
    derandomize=True,  # the same examples on every run: CI does not flip on a lucky draw (vicino-long explores)
    print_blob=True,
    suppress_health_check=_SLOW_DATA,
)
settings.register_profile(
    "vicino-long",
    max_examples=int(os.environ.get("VICINO_PROPERTY_EXAMPLES", "1000")),
    deadline=timedelta(seconds=2),
    print_blob=True,
    suppress_health_check=_SLOW_DATA,
)
settings.register_profile(
    "vicino-debug",
    max_examples=10,
    deadline=None,
    database=None,
    verbosity=Verbosity.verbose,
    print_blob=True,
    suppress_health_check=_SLOW_DATA,
)
settings.load_profile(os.environ.get("VICINO_HYPOTHESIS_PROFILE", "vicino-ci"))
