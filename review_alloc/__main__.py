"""`python -m review_alloc` runs the command line."""

import sys

from review_alloc.cli import main

sys.exit(main())
