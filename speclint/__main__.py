from speclint.cli import entry

if __name__ == "__main__":  # not when a worker process is started from this module
    entry()
