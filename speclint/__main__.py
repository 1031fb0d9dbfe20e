from speclint.cli import entry

entry()
