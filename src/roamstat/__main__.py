import sys

from roamstat.entry import main

sys.exit(main())
