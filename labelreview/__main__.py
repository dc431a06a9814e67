"""``python -m labelreview`` runs the command line."""

from labelreview.cli import main

main()
