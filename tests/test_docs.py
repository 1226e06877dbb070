"""The README stays true: its quick start matches what CI runs, and its Python example runs."""

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
README = (ROOT / "README.md").read_text(encoding="utf-8")


def _quick_start():
    section = README.split("## Quick start", 1)[1].split("\n## ", 1)[0]
    return re.findall(r"```bash\n(.*?)\n```", section, re.S)


def test_quick_start_is_two_commands_and_ci_runs_the_second():
    commands = _quick_start()
    assert len(commands) == 2
    install_and_run, install_and_test = commands
    assert install_and_run.startswith("pip install . && altox plan profiles/")
    assert (ROOT / install_and_run.split("altox plan ", 1)[1].split()[0]).exists()
    assert install_and_test in (ROOT / ".ci" / "run").read_text(encoding="utf-8")


def test_python_example_runs(monkeypatch):
    monkeypatch.chdir(ROOT)
    code = re.findall(r"```python\n(.*?)```", README, re.S)[0]
    namespace = {}
    exec(compile(code, "README.md", "exec"), namespace)
    altox = namespace["altox"]
    assert round(altox.barometric_pressure(8848.0, atmosphere="mountain"), 1) == 252.7   # as the comment says
    assert round(altox.alveolar_po2(760.0, 40.0), 1) == 101.4
    assert namespace["result"].legs
