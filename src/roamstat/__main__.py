import sys

from roamstat.cli import main

sys.exit(main())
