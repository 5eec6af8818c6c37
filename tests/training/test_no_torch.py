"""Without the train extra, training says how to install it instead of failing obscurely."""

from __future__ import annotations

import subprocess
import sys

HINT = "pip install 'stationcheck[train]'"


def run_without_torch(code: str) -> subprocess.CompletedProcess[str]:
    """Runs ``code`` in a fresh interpreter where ``import torch`` fails."""
    prelude = "import sys; sys.modules['torch'] = None\n"
    return subprocess.run(
        [sys.executable, "-c", prelude + code], capture_output=True, text=True, check=False
    )


def test_importing_training_without_torch_gives_the_install_hint() -> None:
    out = run_without_torch(
        "try:\n    import stationcheck.training\n"
        "except Exception as exc:\n    print(type(exc).__name__, exc)\n"
    )
    assert out.stdout.startswith("MissingExtraError") and HINT in out.stdout


def test_train_command_without_torch_prints_one_line_and_exit_code_7() -> None:
    out = run_without_torch(
        "from stationcheck.cli import main\nsys.exit(main(['train', '--steps', '1']))\n"
    )
    assert out.returncode == 7
    assert out.stderr.strip().count("\n") == 0 and HINT in out.stderr
