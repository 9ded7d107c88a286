"""python -m sheetcycle"""

from sheetcycle.cli import main

raise SystemExit(main())
