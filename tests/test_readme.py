"""The README's code runs as printed: the first code a new user copies."""

import re
from pathlib import Path

README = Path(__file__).resolve().parents[1] / "README.md"


def python_blocks():
    return re.findall(r"```python\n(.*?)```", README.read_text(), flags=re.S)


def test_quick_start_is_two_commands():
    # The contributors' rule: install-and-run-demo, install-and-run-tests.
    quick = README.read_text().split("## Quick start", 1)[1].split("##", 1)[0]
    commands = re.findall(r"```bash\n(.*?)```", quick, flags=re.S)[0].strip().splitlines()
    assert commands == ['pip install -e . && cubeloupe demo', 'pip install -e ".[test]" && python -m pytest']


def test_ci_runs_the_readme_test_command():
    ci = (README.parent / ".ci" / "run").read_text()
    assert 'pip install -e ".[test]" && python -m pytest' in ci


def test_analysis_example_runs_and_finds_the_demo_line(capsys):
    import astropy.units as u

    from cubeloupe.analysis import demo_truth

    block = next(b for b in python_blocks() if "open_cube(demo_path" in b)
    namespace = {}
    exec(compile(block, str(README), "exec"), namespace)
    assert "+/-" in capsys.readouterr().out
    # The generator injected the disk's CO J=2-1 line at this velocity (demo_cubes/disk.json).
    injected = demo_truth("disk")["lines"][0]["velocity"]
    line = namespace["line"]
    assert abs(line.centroid - injected) < 3 * line.centroid_error + 1 * u.km / u.s
    assert line.snr > 10
