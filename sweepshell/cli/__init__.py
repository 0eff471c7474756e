"""The ``sweepshell`` command line."""
