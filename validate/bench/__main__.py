"""`python -m milepost.validate.bench` runs every benchmark section (see `check.main`)."""

from milepost.validate.bench.check import main

raise SystemExit(main())
