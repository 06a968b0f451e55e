import sys

from invbench.cli import main

sys.exit(main())
