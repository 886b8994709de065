from loopledger.cli import main

raise SystemExit(main())
