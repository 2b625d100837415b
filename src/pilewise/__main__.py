from pilewise.cli import main

main()
