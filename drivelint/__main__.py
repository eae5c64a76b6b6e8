from drivelint.cli import main

main()
