"""``python -m sampling_client``: the ``attribute-sampling`` command."""

from sampling_client.cli import main

raise SystemExit(main())
