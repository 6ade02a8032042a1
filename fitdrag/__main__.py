import sys

from fitdrag.cli import main

sys.exit(main())
