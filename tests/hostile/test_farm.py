"""Every farm family of hostile cases ends with 0 tracebacks, wrong exits, partial outputs and silent wrongs.

The families (tests/hostile/farm.py) run ``python -m matgen`` in child processes: non-finite config
numbers, name collisions, disk full at every write, kill at every rename, cross-host leases, SIGTERM with
pool workers, memory bombs, the traceback list of the farm request, texture-tool inputs.
"""

import pytest
from farm import FAMILIES, run_families


@pytest.mark.slow
@pytest.mark.parametrize("family", list(FAMILIES))
def test_farm_family_has_no_bad_outcome(family):
    verdicts = run_families([family], progress=False)
    assert verdicts, family
    bad = [
        (v.case, v.rc, v.expected, v.traceback, v.partial[:2], v.silent_wrong[:2], v.note)
        for v in verdicts
        if not v.ok
    ]
    assert not bad, bad
