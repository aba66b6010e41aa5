from surfcheck.cli import main

main()
