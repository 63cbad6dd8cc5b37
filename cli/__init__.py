"""The crystkin command line (installed as the package ``crystkin_cli``)."""
