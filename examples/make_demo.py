"""Write the bundled demo recording (a seeded loader-arm rig test).

Usage:
    python examples/make_demo.py [OUTPUT_CSV]

The generator and the settings per gauge live in the package
(``service.demo``) so that an installed service can run its demo; this
script only calls it.
"""

from __future__ import annotations

import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from service.demo import DEFAULT_CSV, write  # noqa: E402

if __name__ == "__main__":
    print(write(Path(sys.argv[1]) if len(sys.argv) > 1 else DEFAULT_CSV))
