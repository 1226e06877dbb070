from altox.cli.main import main

main()
