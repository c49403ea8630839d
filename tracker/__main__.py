import sys

from tracker.cli.app import main

sys.exit(main())
