import sys

from qcorr.cli import console_main

sys.exit(console_main())
