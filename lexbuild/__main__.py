import sys

from lexbuild.cli import main

sys.exit(main())
