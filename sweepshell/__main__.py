"""``python -m sweepshell`` is the same as the ``sweepshell`` command."""

from sweepshell.cli.main import entry

entry()
