import sys

from fvsolver.cli import main

sys.exit(main())
