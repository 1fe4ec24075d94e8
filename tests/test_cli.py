"""The command-line frame: --config files, exit codes, fault logs, ``python -m pipeline``."""

from __future__ import annotations

import subprocess
import sys
import tomllib
from pathlib import Path

import pandas as pd
import pytest

from pipeline import cli
from pipeline.errors import nearest_names

ROOT = Path(__file__).resolve().parents[1]


def test_python_m_pipeline_lists_commands():
    out = subprocess.run([sys.executable, "-m", "pipeline", "--help"], capture_output=True,
                         text=True, check=True).stdout
    assert "simulate" in out and "check" in out


def test_config_values_apply_and_command_line_wins(tmp_path):
    config = tmp_path / "c.toml"
    config.write_text("[simulate]\nnodes = 4\nsamples = 50\nseed = 3\n")
    assert cli.main(["simulate", "--out", str(tmp_path / "a"), "--config", str(config)]) == 0
    data = pd.read_csv(tmp_path / "a" / "data.csv")
    assert [c for c in data.columns if c != "regime"] == ["X1", "X2", "X3", "X4"]
    assert cli.main(["simulate", "--out", str(tmp_path / "b"), "--config", str(config),
                     "--nodes", "6"]) == 0
    data = pd.read_csv(tmp_path / "b" / "data.csv")
    assert len([c for c in data.columns if c != "regime"]) == 6


def test_config_unknown_key_is_an_input_error(tmp_path, capsys):
    config = tmp_path / "c.toml"
    config.write_text("[simulate]\nnodez = 4\n")
    assert cli.main(["simulate", "--out", str(tmp_path / "a"), "--config", str(config)]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error:") and "nodez" in err and "nodes" in err


def test_config_missing_file_and_bad_toml(tmp_path, capsys):
    missing = str(tmp_path / "no.toml")
    assert cli.main(["simulate", "--out", str(tmp_path), "--config", missing]) == 2
    bad = tmp_path / "bad.toml"
    bad.write_text("nodes = = 3\n")
    assert cli.main(["simulate", "--out", str(tmp_path), "--config", str(bad)]) == 2
    err = capsys.readouterr().err
    assert err.count("error:") == 2 and "Traceback" not in err


def test_default_config_keys_are_options_of_some_command():
    table = tomllib.loads((ROOT / "configs" / "default.toml").read_text())
    names = cli._all_option_names()
    for key, value in table.items():
        if isinstance(value, dict):
            assert key in cli.COMMANDS, key
            sub = {a.dest for a in _subparser(key)._actions}
            for inner in value:
                assert inner in sub, f"[{key}] {inner}"
        else:
            assert key in names, key


def _subparser(name):
    parser = cli.build_parser()
    for action in parser._subparsers._group_actions:
        return action.choices[name]
    raise AssertionError(name)


def test_internal_fault_exits_1_with_a_log(tmp_path, monkeypatch, capsys):
    monkeypatch.setenv("ORIENTEER_LOG_DIR", str(tmp_path))

    def boom(args):
        raise RuntimeError("deliberate fault")

    import pipeline.commands.simulate as sim

    monkeypatch.setattr(sim, "run", boom)
    assert cli.main(["simulate", "--out", str(tmp_path / "x")]) == 1
    err = capsys.readouterr().err
    assert "deliberate fault" in err and "Traceback" not in err
    logs = list(tmp_path.glob("orienteer-fault-*.log"))
    assert len(logs) == 1 and "RuntimeError" in logs[0].read_text()


def test_bad_command_line_exits_2():
    with pytest.raises(SystemExit) as exc:
        cli.main(["simulate", "--nodes", "many"])
    assert exc.value.code == 2


def test_nearest_names():
    assert "X10" in nearest_names("X1O", ["X1", "X10", "Y"])
    assert nearest_names("zzz", ["X1"]) == ""


def test_the_parser_is_built_without_heavy_imports():
    # start-up cost: building every command's parser must not import the numerical stack
    # (checked in a fresh interpreter through sys.modules, the interpreter's own record)
    code = ("import sys, pipeline.cli; pipeline.cli.build_parser(); "
            "print(sorted(m for m in ('numpy', 'pandas', 'scipy', 'networkx', 'rich', "
            "'pipeline.learner', 'pipeline.workflow') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout.strip()
    assert out == "[]"


def test_version_is_that_of_the_installed_package(capsys):
    # the package metadata (importlib.metadata) is the outside reference
    from importlib.metadata import version

    with pytest.raises(SystemExit) as exc:
        cli.main(["--version"])
    assert exc.value.code == 0
    assert capsys.readouterr().out.strip() == f"orienteer {version('orienteer')}"


def test_a_reader_that_leaves_early_loses_no_file(tmp_path):
    # `orienteer check ... --out DIR | head -1`: the pipe closes before the tables are
    # printed; the rest of the output is dropped, the files written after the tables are
    # still written, and the command ends as done (exit 0), with no fault reported
    from pipeline.simulation import simulate

    simulate(nodes=5, regimes=2, samples=100, seed=2).save(tmp_path / "d")
    proc = subprocess.Popen([sys.executable, "-m", "pipeline", "check",
                             str(tmp_path / "d" / "data.csv"), "--regimes",
                             str(tmp_path / "d" / "regimes.csv"), "--out", str(tmp_path / "c")],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    proc.stdout.close()
    err = proc.stderr.read().decode()
    assert proc.wait(timeout=60) == 0, err
    assert "fault" not in err and "Error" not in err
    assert (tmp_path / "c" / "check.json").is_file()
    assert (tmp_path / "c" / "response.csv").is_file()


def test_the_program_leaves_a_closed_store_and_the_exit_code_of_main(tmp_path):
    # `python -m pipeline` runs `entry`: it freezes the collector's objects before the
    # interpreter exits; the store must still be closed (SQLite's write-ahead log merged
    # back and removed, as SQLite does on the last close) and the exit codes unchanged
    from pipeline.simulation import simulate

    simulate(nodes=5, regimes=2, samples=200, seed=1).save(tmp_path / "d")
    words = [sys.executable, "-m", "pipeline", "learn", str(tmp_path / "d" / "data.csv"),
             "--regimes", str(tmp_path / "d" / "regimes.csv"), "--out", str(tmp_path / "o")]
    for alpha in ("0.01", "0.001"):
        done = subprocess.run(words + ["--alpha", alpha], capture_output=True, text=True)
        assert done.returncode == 0, done.stderr
        assert sorted(p.name for p in (tmp_path / "o").glob("tests.sqlite*")) == ["tests.sqlite"]
    bad = subprocess.run(words[:5] + ["--regimes", str(tmp_path / "none.csv"), "--out",
                                      str(tmp_path / "o")], capture_output=True, text=True)
    assert bad.returncode == 2 and bad.stderr.startswith("error:")
