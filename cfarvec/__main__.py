from cfarvec.cli import main

raise SystemExit(main())
