"""``python -m stringcheck``."""

from stringcheck.cli.app import main

main()
