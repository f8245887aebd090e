import sys

from investigator.cli.main import main

sys.exit(main())
