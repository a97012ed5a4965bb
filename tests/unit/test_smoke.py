"""The package imports and the CLI answers."""

from edge.cli import main


def test_cli_version(capsys):
    """--version prints the program name."""
    try:
        main(["--version"])
    except SystemExit as exc:
        assert exc.code == 0
    assert "steam-edge" in capsys.readouterr().out
