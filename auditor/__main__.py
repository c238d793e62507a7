from auditor.cli import main

main()
