"""Project-level promises: the README's commands, CI, the demo data."""

import pathlib
import re

ROOT = pathlib.Path(__file__).resolve().parent.parent


def _readme_commands():
    text = (ROOT / "README.md").read_text()
    setup = text.split("## Set up", 1)[1].split("\n## ", 1)[0]
    return re.findall(r"```bash\n(.*?)\n```", setup, flags=re.S)


def test_readme_has_two_setup_commands_and_ci_runs_the_second():
    commands = _readme_commands()
    assert len(commands) == 2
    assert "cwlimits demo" in commands[0]
    ci = (ROOT / ".ci" / "run").read_text()
    assert commands[1] in ci.splitlines()


def test_demo_catalogue_is_the_packaged_one_and_fictional():
    packaged = ROOT / "cwlimits" / "data" / "demo.csv"
    user = ROOT / "target_lists" / "demo.csv"
    assert user.read_bytes() == packaged.read_bytes()
    header = packaged.read_text().splitlines()[0].lower()
    assert "fictional" in header


def test_ci_runs_the_benchmark_smoke_step_after_the_tests_not_inside_them():
    entry = "benchmarks" + "/run.py"  # spelled apart so that this file does not match
    lines = (ROOT / ".ci" / "run").read_text().splitlines()
    tests_at = lines.index(_readme_commands()[1])
    bench_at = [i for i, line in enumerate(lines)
                if line.startswith(f"python {entry} --quick")]
    # its own step, after the README's test command (issue 16: benchmarks out of pytest)
    assert len(bench_at) == 1 and bench_at[0] > tests_at
    runs_benchmarks = [p.name for p in (ROOT / "tests").glob("*.py")
                       if entry in p.read_text()]
    assert runs_benchmarks == []
