from harvester.cli import main

main()
