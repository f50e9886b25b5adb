import sys

from auditmean.cli import main

sys.exit(main())
