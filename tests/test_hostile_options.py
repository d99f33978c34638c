"""Hostile options and configuration: clear usage errors or sensible caps, and no silent pass
(a run that checks nothing must not look clean)."""

from __future__ import annotations

import os
from pathlib import Path

import pytest
from click.testing import CliRunner

from chainlint.cli import main

CHAIN = "out = d.loc[lambda d: d.a > 1].loc[lambda d: d.b == 2]\n"


def _run(*args: str, cwd: Path | None = None) -> tuple[int, str]:
    previous = os.getcwd()
    if cwd is not None:
        os.chdir(cwd)
    try:
        result = CliRunner().invoke(main, list(args))
    finally:
        os.chdir(previous)
    assert result.exception is None or isinstance(result.exception, SystemExit), "".join(__import__("traceback").format_exception(result.exception))
    return result.exit_code, result.output


@pytest.fixture()
def project(tmp_path: Path) -> Path:
    (tmp_path / "pyproject.toml").write_text("")
    (tmp_path / "m.py").write_text(CHAIN)
    (tmp_path / "t.csv").write_text("a,b\n" + "1,2\n3,4\n" * 10)
    code, output = _run("profile", str(tmp_path / "t.csv"), "--name", "t", "--store", str(tmp_path / ".chainlint"))
    assert code == 0, output
    return tmp_path


@pytest.mark.parametrize(("option", "value", "wanted"), [
    ("--max-file-size", "nan", "not a finite number"),
    ("--max-file-size", "1e300", "range"),
    ("--min-gain", "nan", "not a finite number"),
    ("--min-saving-ms", "inf", "not a finite number"),
    ("--exclude", "!", "not a valid gitignore pattern"),
    ("--exclude", "\\", "not a valid gitignore pattern"),
])
def test_bad_option_values_are_usage_errors(project: Path, option: str, value: str, wanted: str) -> None:
    code, output = _run("check", str(project / "m.py"), option, value)
    assert code == 2 and wanted in output


@pytest.mark.parametrize(("text", "wanted"), [
    ("tool = 1\n", "`tool` must be a table"),
    ("[tool]\nchainlint = [1]\n", "[tool.chainlint] must be a table"),
    ("[tool.chainlint]\nexclude = ['!']\n", "`exclude`: '!' is not a valid gitignore pattern"),
    ("[tool.chainlint]\nmin_gain = nan\n", "`min_gain` must be a finite number"),
    ("[tool.chainlint]\nmin_saving_ms = inf\n", "`min_saving_ms` must be a finite number"),
    ("[tool.chainlint.rows]\nt = -5\n", "row counts of at least 1"),
    ("[tool.chainlint]\nstore = 'no-such-store'\n", "no-such-store is not a folder (set in "),
])
def test_bad_configuration_is_an_error_naming_the_file(project: Path, text: str, wanted: str) -> None:
    (project / "pyproject.toml").write_text(text)
    code, output = _run("check", str(project / "m.py"))
    assert code == 2 and wanted in output and "pyproject.toml" in output


def test_configuration_errors_carry_their_place_as_fields(tmp_path: Path) -> None:
    """Reporters and the editor place an error by its fields; the message is `path[:line:col]: reason`."""
    from chainlint.config import ConfigError, find_config, parse_config

    (tmp_path / "chainlint.toml").write_text("min_gain = 2\nrules = \n")
    with pytest.raises(ConfigError) as caught:
        find_config(tmp_path)
    error = caught.value
    # tomllib (Python's standard TOML reader) places a missing value after `=` at the line's end.
    assert (error.path, error.line, error.column) == (str(tmp_path / "chainlint.toml"), 2, 9)
    assert str(error).startswith(f"{tmp_path / 'chainlint.toml'}:2:9: not valid TOML: ")
    with pytest.raises(ConfigError) as caught:
        parse_config(tmp_path / "chainlint.toml", {"min_gian": 2}, set())
    assert caught.value.path == str(tmp_path / "chainlint.toml") and caught.value.reason.startswith("unknown key `min_gian`")


def test_a_store_given_explicitly_that_does_not_exist_is_an_error(project: Path) -> None:
    for command in (["check", str(project / "m.py")], ["explain", str(project / "m.py")], ["profiles"],
                    ["profiles", "show", "t"], ["profiles", "check"]):
        if command[0] == "profiles":
            args = ["profiles", "--store", str(project / "stroe"), *command[1:]]
        else:
            args = [*command, "--store", str(project / "stroe")]
        code, output = _run(*args)
        assert code == 2 and "stroe is not a folder" in output, (args, output)
    code, _ = _run("check", str(project / "m.py"), "--store", str(project / ".chainlint"))
    assert code in (0, 1)


def test_a_binding_to_a_profile_the_store_lacks_is_reported(project: Path) -> None:
    (project / "m.py").write_text("# chainlint: profile=tt\n" + CHAIN)
    store = str(project / ".chainlint")
    code, output = _run("check", str(project / "m.py"), "--store", store)
    assert code == 1 and "missing-profile: chain on `d` is not checked: the comment names profile `tt`" in output
    assert _run("check", str(project / "m.py"), "--store", store, "--fail-rule", "missing-profile")[0] == 1
    assert _run("check", str(project / "m.py"), "--store", store, "--fail-rule", "reorder")[0] == 0
    (project / "m.py").write_text(CHAIN)
    (project / "pyproject.toml").write_text("[tool.chainlint.bindings]\n'd' = 'tt'\n")
    code, output = _run("check", str(project / "m.py"), "--store", store)
    assert code == 1 and "maps `d` to `tt`" in output


@pytest.mark.parametrize("name", ["a\n", "a\nb", "../x", "a/b", "", "x" * 201, ".hidden"])
def test_bad_profile_names_are_errors(project: Path, name: str) -> None:
    store = str(project / ".chainlint")
    for args in (["profile", str(project / "t.csv"), "--name", name, "--store", store],
                 ["profiles", "--store", store, "check", name],
                 ["profiles", "--store", store, "show", name],
                 ["profiles", "--store", store, "merge", name, "t"]):
        code, output = _run(*args)
        assert code == 2 and "profile name" in output, (args, output)
    assert sorted(p.name for p in (project / ".chainlint" / "profiles").iterdir()) == ["t.json"]


def test_workers_are_capped_at_files_and_cores(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    from chainlint.engine import run

    started = []

    class Pool:
        def __init__(self, max_workers: int, mp_context: object) -> None:
            started.append(max_workers)

        def __enter__(self) -> Pool:
            return self

        def __exit__(self, *args: object) -> None:
            return None

        def map(self, function, work, chunksize):  # type: ignore[no-untyped-def]
            return map(function, work)

    for index in range(20):
        (tmp_path / f"m{index}.py").write_text(CHAIN)
    monkeypatch.setattr(run, "ProcessPoolExecutor", Pool)
    monkeypatch.setattr(run.os, "cpu_count", lambda: 2)
    results = run.analyse_files(sorted(str(p) for p in tmp_path.iterdir()), jobs=64)
    assert len(results) == 20 and started == [2]


def test_denied_store_or_path_is_reported_not_taken_as_empty(project: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """Tests run as root, whom file modes do not stop: the system's answer to another user is
    stood in for. A store whose profiles cannot be listed must not pass as one without profiles."""
    denied = {str(project / ".chainlint" / "profiles"), str(project / "secret")}
    real_listdir, real_stat = os.listdir, os.stat

    def listdir(path):  # type: ignore[no-untyped-def]
        if str(path) in denied:
            raise PermissionError(13, "Permission denied", str(path))
        return real_listdir(path)

    def stat(path, *args, **kwargs):  # type: ignore[no-untyped-def]
        if str(path).startswith(str(project / "secret")):
            raise PermissionError(13, "Permission denied", str(path))
        return real_stat(path, *args, **kwargs)

    monkeypatch.setattr(os, "listdir", listdir)
    code, output = _run("check", str(project / "m.py"), "--store", str(project / ".chainlint"))
    assert code == 2 and "cannot list the profiles: Permission denied" in output
    code, output = _run("profiles", "--store", str(project / ".chainlint"))
    assert code == 2 and "cannot list the profiles: Permission denied" in output
    monkeypatch.setattr(os, "stat", stat)
    code, output = _run("explain", str(project / "secret" / "x.py"))
    assert code == 2 and "secret/x.py:1:1: error: cannot read this path: Permission denied" in output
