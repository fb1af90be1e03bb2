from qualbayes.cli import main

raise SystemExit(main())
