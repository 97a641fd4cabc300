"""``python -m faultmap``."""

from faultmap.cli import main

main()
