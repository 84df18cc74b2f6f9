import sys

from tuneopt.cli import main

sys.exit(main())
