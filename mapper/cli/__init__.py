"""The ``mapper`` command: a thin shell over the library, one module per sub-command."""
