import sys

from qcorr.cli import main

sys.exit(main())
