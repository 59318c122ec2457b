from picker.cli import main

main()
