import sys

from dfkit.cli import main

sys.exit(main())
