"""``python -m planner``."""

from planner.cli import main

main()
