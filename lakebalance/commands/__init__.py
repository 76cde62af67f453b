"""One module per subcommand (see :mod:`lakebalance.cli`)."""
