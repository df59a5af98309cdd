from checker.cli.main import main_entry

if __name__ == "__main__":  # worker processes re-import this module: do not run the CLI there
    main_entry()
