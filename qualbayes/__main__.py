from qualbayes.cli import main

if __name__ == "__main__":  # not when a process started by the batch imports this module
    raise SystemExit(main())
