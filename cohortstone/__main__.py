import sys

from cohortstone.cli import main

sys.exit(main())
