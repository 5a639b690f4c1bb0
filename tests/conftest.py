import os
import sys

# Let tests import the helpers that live beside them (ngspice_run).
sys.path.insert(0, os.path.dirname(__file__))
