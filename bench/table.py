"""One row of the speed table, the machine it ran on, and the table as text.

>>> print(format_table([Row("demo", "size 1", "1.0 ms", "<= 2 ms", True)], {"cpu": "x"}).splitlines()[-1])
| demo | size 1 | 1.0 ms | <= 2 ms | PASS |
"""
from __future__ import annotations

import datetime
import os
import platform
from dataclasses import dataclass, field


@dataclass
class Row:
    """A measured figure with its target; ``met`` is None for figures without a target."""

    item: str
    case: str
    result: str
    target: str = ""
    met: bool | None = None
    data: dict = field(default_factory=dict)

    @property
    def status(self) -> str:
        return "" if self.met is None else "PASS" if self.met else "MISS"

    def to_dict(self) -> dict:
        return {"item": self.item, "case": self.case, "result": self.result, "target": self.target,
                "status": self.status or None, "data": self.data}


def ms(seconds: float) -> str:
    """Seconds as milliseconds text with three significant figures."""
    value = seconds * 1000.0
    return f"{value:.3g} ms" if value < 1000 else f"{value:,.0f} ms"


def cpu_model() -> str:
    """The CPU model name from /proc/cpuinfo ('unknown' elsewhere)."""
    try:
        with open("/proc/cpuinfo", encoding="utf-8") as f:
            for line in f:
                if line.lower().startswith("model name"):
                    return line.split(":", 1)[1].strip()
    except OSError:
        pass
    return platform.processor() or "unknown"


def machine() -> dict:
    """Where and with what the table was measured."""
    import flint
    import numpy
    import pyqtgraph
    import PySide6
    import sympy
    load = os.getloadavg() if hasattr(os, "getloadavg") else (float("nan"),) * 3
    return {
        "date": datetime.datetime.now(datetime.timezone.utc).strftime("%Y-%m-%d %H:%M UTC"),
        "cpu": cpu_model(),
        "cores": os.cpu_count(),
        "load_1min_at_start": round(load[0], 2),
        "system": f"{platform.system()} {platform.release()}",
        "python": platform.python_version(),
        "numpy": numpy.__version__,
        "python-flint": flint.__version__,
        "sympy": sympy.__version__,
        "PySide6": PySide6.__version__,
        "pyqtgraph": pyqtgraph.__version__,
    }


def format_table(rows: list[Row], info: dict) -> str:
    """A Markdown table preceded by the machine description."""
    head = [f"Machine: {info.get('cpu')}, {info.get('cores')} cores"
            + (f" (1-min load {info['load_1min_at_start']} at start)" if "load_1min_at_start" in info else ""),
            "Software: " + ", ".join(f"{k} {info[k]}" for k in ("system", "python", "numpy", "python-flint",
                                                                 "sympy", "PySide6", "pyqtgraph") if k in info),
            f"Date: {info.get('date', '')}", ""]
    cells = [["#", "measure", "result", "target", "status"]]
    cells += [[r.item, r.case, r.result, r.target, r.status] for r in rows]
    lines = ["| " + " | ".join(c) + " |" for c in cells]
    lines.insert(1, "|" + "|".join("---" for _ in cells[0]) + "|")
    return "\n".join(head + lines) if info else "\n".join(lines)
