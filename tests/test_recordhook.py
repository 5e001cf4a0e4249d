"""The recording hook: templates split without a shell, placeholders filled, commands run."""
import sys

import pytest

from planner.errors import UserError
from planner.recordhook import (RecordingProcess, RecordingValues, command_words,
                                parse_template)

VALUES = RecordingValues(name="G300-4", l_deg=300.0, b_deg=-4.0, start_utc="2027-03-01T12:00:00Z",
                         end_utc="2027-03-01T12:15:00Z", freq_mhz=1420.612345678, seconds=899.6)


def test_words_and_placeholders():
    words = parse_template("rec --out 'night {name}.dat' --l {l_deg:.1f} -b {b_deg} "
                           "--from {start_utc} --to {end_utc} -f {freq_mhz} -t {seconds} {{x}}")
    assert command_words(words, VALUES) == [
        "rec", "--out", "night G300-4.dat", "--l", "300.0", "-b", "-4.0",
        "--from", "2027-03-01T12:00:00Z", "--to", "2027-03-01T12:15:00Z",
        "-f", "1420.612346", "-t", "900", "{x}"]


def test_no_shell_is_involved(tmp_path):
    words = parse_template("echo {name}; rm -rf $HOME | cat")
    assert command_words(words, VALUES) == ["echo", "G300-4;", "rm", "-rf", "$HOME", "|", "cat"]


@pytest.mark.parametrize("text, message", [
    ("", "empty command"),
    ("rec 'unclosed", "cannot split"),
    ("rec {where}", r"unknown placeholder \{where\}"),
    ("rec {l_deg:.1q}", "'{l_deg:.1q}'"),
    ("rec {name", "'{name'"),
])
def test_template_mistakes(text, message):
    with pytest.raises(UserError, match=message) as info:
        parse_template(text)
    assert str(info.value).startswith("--record: ")


def test_command_success_reports_its_files(tmp_path):
    made = tmp_path / "G300-4.dat"
    code = ("import pathlib, sys; p = pathlib.Path(sys.argv[1]); p.write_text('spectrum'); "
            "print(p); print('not a file')")
    result = RecordingProcess([sys.executable, "-c", code, str(made)]).finish(20.0)
    assert result.ok and result.exit_status == 0 and result.files == (str(made),)


def test_command_failure_keeps_the_end_of_its_error_output():
    code = "import sys; sys.stderr.write('x' * 1000 + ' SDR not found'); sys.exit(2)"
    result = RecordingProcess([sys.executable, "-c", code]).finish(20.0)
    assert not result.ok and result.exit_status == 2
    assert result.problem.startswith("exit status 2: ") and result.problem.endswith("SDR not found")
    assert len(result.problem) < 400


def test_command_that_cannot_start():
    process = RecordingProcess(["/nonexistent/recorder"])
    assert process.start_problem.startswith("cannot run '/nonexistent/recorder'")
    assert process.finish(1.0).problem == process.start_problem


def test_overrunning_command_is_stopped():
    process = RecordingProcess([sys.executable, "-c", "import time; time.sleep(60)"])
    result = process.finish(0.2)
    assert result.exit_status is None and "stopped it" in result.problem
    assert not process.running()
