"""`python -m fields.cli`."""
from fields.cli import main

raise SystemExit(main())
