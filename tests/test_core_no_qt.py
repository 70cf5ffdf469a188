"""core/ must never import Qt: import every core module, in every sub-package, with PySide6 blocked
in a fresh interpreter."""
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]

SCRIPT = r"""
import importlib, pkgutil, sys

class BlockQt:
    def find_spec(self, name, path=None, target=None):
        if name.split('.')[0] in ('PySide6', 'shiboken6', 'PyQt5', 'PyQt6', 'pyqtgraph'):
            raise ImportError('core must not import ' + name)
        return None

sys.meta_path.insert(0, BlockQt())
import core
names = [info.name for info in pkgutil.walk_packages(core.__path__, 'core.') if not info.name.endswith('__main__')]
assert len(names) > 20, names
for name in names:
    importlib.import_module(name)
r = core.check_polynomial('s^3 + 3s^2 + 2s + K', parameter='K', at={'K': 2})
print('ok', r.nominal.stable)
"""


def test_core_imports_and_runs_with_qt_blocked():
    out = subprocess.run([sys.executable, "-c", SCRIPT], cwd=ROOT, capture_output=True, text=True, timeout=120, check=False)
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip() == "ok True"
