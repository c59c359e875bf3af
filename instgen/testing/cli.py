"""Running the command line inside a test: exit code, standard output and standard error."""

from __future__ import annotations


def run_cli(argv, capsys) -> tuple[int, str, str]:
    """Run ``instgen ARGV`` in this process; argparse's own refusals count as their exit code.

    ``capsys`` is pytest's capture fixture.
    """
    from ..cli import main

    try:
        code = main([str(a) for a in argv])
    except SystemExit as exc:  # argparse exits on bad arguments
        code = exc.code
    out = capsys.readouterr()
    return code, out.out, out.err
