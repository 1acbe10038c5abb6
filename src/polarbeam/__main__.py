from polarbeam.cli.commands import main

main()
