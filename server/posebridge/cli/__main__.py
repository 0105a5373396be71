"""``python -m posebridge.cli``: the same as the ``posebridge`` command."""

import sys

from posebridge.cli.main import main

sys.exit(main())
