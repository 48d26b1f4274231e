import sys

from mmsverify.cli import console

sys.exit(console())
