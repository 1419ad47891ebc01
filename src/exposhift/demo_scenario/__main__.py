"""``python -m exposhift.demo_scenario [OUT_DIR]``: write the invented demo evidence base."""

from exposhift.demo_scenario import main

raise SystemExit(main())
