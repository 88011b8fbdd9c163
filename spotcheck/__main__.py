from spotcheck.cli import main

main()
