"""Put tests/reference on sys.path for the transport tests.

It holds the slow literal implementations and shared stacks.
"""

import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "reference"))
