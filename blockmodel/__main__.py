import sys

from blockmodel.app.cli import main

sys.exit(main())
