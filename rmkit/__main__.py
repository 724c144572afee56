import sys

from rmkit.cli import main

sys.exit(main())
