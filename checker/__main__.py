from checker.cli import main_entry

main_entry()
