from spotcheck.cli import main

if __name__ == "__main__":  # not again in a spawned child process (checks/reference.py)
    main()
