import sys

from trueband.bridge.cli import main

sys.exit(main())
