from advisory.cli import main

raise SystemExit(main())
