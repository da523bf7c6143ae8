import sys

from bandgeo.cli import main

sys.exit(main())
