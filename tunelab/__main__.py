from tunelab.cli import main

main()
