"""python -m sweep: the timer-sweep command line."""
from .cli import main

main()
