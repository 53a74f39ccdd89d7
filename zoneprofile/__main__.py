import sys

from zoneprofile.cli import main

sys.exit(main())
