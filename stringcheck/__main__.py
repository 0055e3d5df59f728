"""``python -m stringcheck``."""

from .cli import main

main()
