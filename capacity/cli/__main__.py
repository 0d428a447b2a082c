"""python -m capacity.cli"""
import sys

from capacity.cli import main

sys.exit(main())
