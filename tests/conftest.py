"""Test-wide settings.

Property tests (hypothesis) draw random examples locally, so new failures can turn up; in CI
(``CI`` set to anything but "" / "0" / "false") the "ci" profile derandomizes the search so the same
code gives the same verdict every run, and no test fails on a slow machine's timing.
"""
import os

from hypothesis import settings

settings.register_profile("ci", derandomize=True, deadline=None, print_blob=True)
settings.register_profile("dev", deadline=None, print_blob=True)
settings.load_profile("ci" if os.environ.get("CI", "").strip().lower() not in ("", "0", "false") else "dev")
