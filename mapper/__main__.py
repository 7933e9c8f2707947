from mapper.cli.main import main

raise SystemExit(main())
