"""Security of burndesk's inputs and outputs, checked by behaviour.

``tests/test_architecture.py`` scans the source for eval, exec and pickle; here the files
themselves are tried:

* profiles, scenarios and sessions are data only: text that looks like Python or shell code is
  a bad value (refused, naming the field) or plain text (shown as it is), and nothing runs;
* oversized and absurdly nested files are refused by the size and nesting limits;
* a session file is owner-only (0o600) even under umask 0, and so is a recovered one;
* CSV and OPM exports write fixed names inside the folder given and never through a link
  (the file, its temporary twin, a dangling link), nor into another file sharing its inode;
* a file name written inside a file (``vehicle = "../../etc/passwd"``, ``[state] opm =
  "/dev/zero"``, a named pipe) cannot hang the tool or echo another file's content.
"""

from __future__ import annotations

import json
import os
import re
import signal
import stat
import subprocess
import sys
from contextlib import contextmanager
from pathlib import Path

import pytest

from console.files import MAX_FILE_BYTES
from console.profiles import load_body
from console.scenario_file import load_scenario, load_state_file
from console.session_ops import Session
from mechanics.session.journal import Journal

EXE = str(Path(sys.executable).parent / "burndesk")
CANARY = "PWNED"  # a file of this name appearing anywhere means something was executed

VEHICLE = """name = "SEC-1"
dry_mass = "142 kg"
propellant = "18 kg"
[[thrusters]]
count = 4
thrust = "1 N"
isp = "220 s"
"""

SCENARIO = """name = "security"
body = "earth"
vehicle = "craft.toml"
epoch = "2027-03-14T06:00:00Z"
[state]
periapsis_alt = "380 km"
apoapsis_alt = "402 km"
i = 97.6
[target]
kind = "circular"
altitude = "420 km"
[options]
model = "two-body"
"""


def cli(*args, cwd, ok=None, **kw):
    env = {k: v for k, v in os.environ.items() if k not in ("BURNDESK_DEBUG", "BURNDESK_PROFILES")}
    proc = subprocess.run([EXE, *map(str, args)], capture_output=True, text=True, timeout=120, cwd=cwd,
                          env=env, **kw)
    assert "Traceback" not in proc.stderr, proc.stderr
    if ok is not None:
        assert proc.returncode in ok, (proc.returncode, proc.stdout, proc.stderr)
    return proc


def refused(proc, *words):
    assert proc.returncode == 2, (proc.returncode, proc.stdout, proc.stderr)
    lines = proc.stderr.splitlines()
    assert len(lines) == 1 and lines[0].startswith("burndesk: "), proc.stderr
    for w in words:
        assert w in lines[0], (w, lines[0])
    return lines[0]


@pytest.fixture
def work(tmp_path):
    folder = tmp_path / "work"
    folder.mkdir()
    (folder / "craft.toml").write_text(VEHICLE)
    (folder / "scenario.toml").write_text(SCENARIO)
    yield folder
    assert not list(tmp_path.rglob(CANARY)), "something was executed"


# --------------------------------------------------------------------------- data only

CODE = [f"__import__('os').system('touch {CANARY}')", f"$(touch {CANARY})", f"`touch {CANARY}`",
        f"1; touch {CANARY}", f"1 km; import os; os.system('touch {CANARY}')", f"eval(\"open('{CANARY}','w')\")",
        "1 __import__", "1 __class__", "1 __globals__", "{{7*7}}"]


@pytest.mark.parametrize("code", CODE)
@pytest.mark.parametrize("where, field", [
    (("state", "periapsis_alt"), "state.periapsis_alt"),
    (("target", "altitude"), "target.altitude"),
    (("options", "lead_time"), "options.lead_time"),
    ((None, "epoch"), "epoch"),
])
def test_code_in_a_value_is_a_bad_value(work, code, where, field):
    table, key = where
    lines = SCENARIO.splitlines()
    if table is None:
        lines = [f"{key} = {json.dumps(code)}" if line.startswith(f"{key} =") else line for line in lines]
    else:
        start = lines.index(f"[{table}]")
        lines.insert(start + 1, f"{key} = {json.dumps(code)}")
        lines = [line for k, line in enumerate(lines) if not (k > start + 1 and line.startswith(f"{key} ="))]
    path = work / "code.toml"
    path.write_text("\n".join(lines) + "\n")
    with pytest.raises(ValueError, match=rf"code\.toml: (.*: )?{re.escape(field)}: "):
        load_scenario(path)


def test_code_in_free_text_is_only_text(work):
    name = f"$(touch {CANARY}) `touch {CANARY}` __import__('os').system('touch {CANARY}')"
    (work / "text.toml").write_text(SCENARIO.replace('name = "security"', f"name = {json.dumps(name)}"))
    (work / "craft.toml").write_text(VEHICLE.replace('name = "SEC-1"', f"name = {json.dumps(name)}"))
    proc = cli("plan", "text.toml", "--json", cwd=work, ok=(0, 3))
    assert name in json.loads(proc.stdout).values() or name in proc.stdout


def test_code_in_a_body_or_vehicle_profile_is_a_bad_value(work):
    (work / "body.toml").write_text('name = "x"\nmu = { value = "__import__(\'os\')", source = "x" }\n'
                                    'radius = { value = "6378 km", source = "x" }\n')
    (work / "b.toml").write_text(SCENARIO.replace('body = "earth"', 'body = "body.toml"'))
    refused(cli("orbit", "b.toml", cwd=work), "body.toml: mu")
    (work / "craft.toml").write_text(VEHICLE.replace('thrust = "1 N"', 'thrust = "1 N; touch PWNED"'))
    refused(cli("orbit", "scenario.toml", cwd=work), "craft.toml: thrusters[1].thrust")


def test_session_payloads_are_data_only(work):
    """A hand-made journal row (its checksum is no secret) with code in its payload is refused
    as malformed and shown as rejected; nothing runs."""
    path = work / "campaign.burn"
    Session.create(path, load_scenario(work / "scenario.toml")).close()
    with Journal.open(path) as j:
        j.append("gauge_reading_taken", {"epoch_s": f"__import__('os').system('touch {CANARY}')",
                                         "propellant_kg": 1.0, "method": "x"})
        j.append(f"os.system('touch {CANARY}')", {"__class__": "subprocess.Popen", "args": ["touch", CANARY]})
        j.append("gauge_reading_taken", {"epoch_s": 1.8e9, "propellant_kg": {"__reduce__": "os.system"},
                                         "method": "x"})
    proc = cli("session", "show", path, "--json", cwd=work, ok=(0, 3))
    text = proc.stdout + proc.stderr
    with Session.open(path, readonly=True) as s:
        assert [r.seq for r in s.rejected] == [2, 3, 4]
    assert "rejected" in text or "malformed" in text or "unknown event kind" in text


# --------------------------------------------------------------------------- size and nesting limits

@pytest.mark.parametrize("make, words", [
    (lambda: "a = " + "[" * 300_000 + "]" * 300_000 + "\n", ("nested too deeply",)),
    (lambda: "a = " + "{b = " * 100_000 + "1" + "}" * 100_000 + "\n", ("nested too deeply",)),
    (lambda: "[" + ".".join(["t"] * 1_000_000) + "]\n", ("bytes, larger than",)),
    (lambda: "".join(f"[t{k}]\n" for k in range(1_000_000)), ("bytes, larger than",)),
    (lambda: 'name = "' + "x" * 10_000_000 + '"\n', ("bytes, larger than",)),
])
def test_huge_or_deep_files_are_refused(work, make, words):
    (work / "big.toml").write_text(make())
    refused(cli("orbit", "big.toml", cwd=work), "big.toml", *words)


def test_long_values_under_the_size_limit_are_refused_or_kept_as_text(work):
    long = "1" + " " * (MAX_FILE_BYTES // 2) + "km"
    (work / "long.toml").write_text(SCENARIO.replace('apoapsis_alt = "402 km"', f"apoapsis_alt = {json.dumps(long)}"))
    refused(cli("orbit", "long.toml", cwd=work), "state.apoapsis_alt", "too long")
    # a deep dotted key under the size limit: the TOML parser needed minutes for one (refused first)
    for text in ("[" + ".".join(["t"] * 300_000) + "]\n", "a." * 300_000 + "b = 1\n",
                 'x = { "' + '"."'.join(["k"] * 100_000) + '" = 1 }\n'):
        (work / "deep.toml").write_text(text)
        refused(cli("orbit", "deep.toml", cwd=work), "deep.toml", "nested too deeply", "line 1")
    (work / "ok.toml").write_text("[" + ".".join(["t"] * 32) + "]\n")  # 32 parts: parsed, then refused
    refused(cli("orbit", "ok.toml", cwd=work), "ok.toml", "unknown key 't'")


def test_oversized_opm_is_refused(work):
    (work / "big.opm").write_text("CCSDS_OPM_VERS = 3.0\n" + "COMMENT x\n" * (MAX_FILE_BYTES // 10 + 1))
    (work / "s.toml").write_text('body = "earth"\n[state]\nopm = "big.opm"\n')
    refused(cli("orbit", "s.toml", cwd=work), "big.opm", "larger than")


# --------------------------------------------------------------------------- owner-only sessions

def test_session_files_are_owner_only_under_umask_zero(work):
    umask0 = dict(preexec_fn=lambda: os.umask(0))
    cli("session", "init", "campaign.burn", "--scenario", "scenario.toml", cwd=work, ok=(0, 3), **umask0)
    cli("session", "gauge", "campaign.burn", "--propellant", 17, "--epoch", "2027-03-14T07:00:00Z", cwd=work,
        ok=(0,), **umask0)
    cli("session", "recover", "campaign.burn", "copy.burn", cwd=work, ok=(0,), **umask0)
    for name in ("campaign.burn", "copy.burn"):
        assert stat.S_IMODE(os.stat(work / name).st_mode) == 0o600, name
    for p in work.iterdir():  # no side file or temporary left readable by others
        if p.name.startswith((".campaign", ".copy", "campaign.burn-", "copy.burn-")):
            assert stat.S_IMODE(os.stat(p).st_mode) == 0o600, p.name


# --------------------------------------------------------------------------- exports

@pytest.fixture
def outside(tmp_path):
    victim = tmp_path / "victim.txt"
    victim.write_text("keep me")
    return victim


@pytest.mark.parametrize("command", [("plan", "scenario.toml"), ("session", "export", "campaign.burn")])
@pytest.mark.parametrize("trap", ["temporary twin", "dangling link", "hard link"])
def test_csv_exports_never_write_through_links(work, outside, command, trap):
    if command[0] == "session":
        Session.create(work / "campaign.burn", load_scenario(work / "scenario.toml")).close()
    out = work / "export"
    out.mkdir()
    if trap == "temporary twin":
        (out / ".queue.csv.tmp").symlink_to(outside)
    elif trap == "dangling link":
        (out / "queue.csv").symlink_to(work / "nowhere" / "created.csv")
    else:
        os.link(outside, out / "queue.csv")
    proc = cli(*command, "--csv", "export", cwd=work)
    if trap == "hard link":  # the export replaces the name; the other file keeps its content
        assert proc.returncode in (0, 3), proc.stderr
        assert (out / "queue.csv").read_text().startswith("burn,")
        assert os.stat(out / "queue.csv").st_ino != os.stat(outside).st_ino
    else:
        refused(proc, "link")
        assert not (work / "nowhere").exists()
    assert outside.read_text() == "keep me"


def test_opm_export_never_writes_through_its_temporary_twin(work, outside):
    (work / ".out.opm.tmp").symlink_to(outside)
    refused(cli("plan", "scenario.toml", "--opm", "out.opm", cwd=work), "link")
    (work / ".out.opm.tmp").unlink()
    (work / "out.opm").symlink_to(work / "nowhere.opm")
    refused(cli("plan", "scenario.toml", "--opm", "out.opm", "--force", cwd=work), "link")
    assert not (work / "nowhere.opm").exists() and outside.read_text() == "keep me"


def test_names_inside_files_do_not_choose_export_paths(work):
    """Vehicle and object names that look like paths only ever appear inside the files."""
    (work / "craft.toml").write_text(VEHICLE.replace('name = "SEC-1"', 'name = "../../escaped"'))
    out = work / "export"
    out.mkdir()
    before = sorted(p.name for p in work.parent.rglob("*"))
    cli("plan", "scenario.toml", "--csv", "export", "--opm", "export/q.opm", cwd=work, ok=(0, 3))
    assert sorted(os.listdir(out)) == ["q.opm", "queue.csv"]
    after = sorted(p.name for p in work.parent.rglob("*"))
    assert sorted(set(after) - set(before)) == ["q.opm", "queue.csv"]
    assert "OBJECT_NAME        = ../../escaped" in (out / "q.opm").read_text()


# --------------------------------------------------------------------------- file names inside files

@pytest.fixture
def secret(tmp_path):
    """A file the scenario author should not be able to read back through burndesk."""
    path = tmp_path / "private" / "creds"
    path.parent.mkdir()
    path.write_text("hunter2-TOP-SECRET-TOKEN-0123456789abcdef\npassword = 'hunter2-TOP-SECRET'\n")
    return path


@pytest.mark.parametrize("line", ['vehicle = "../private/creds"', 'body = "../private/creds"',
                                  "[state]\nopm = \"../private/creds\""])
def test_a_path_to_another_file_does_not_echo_it(work, secret, line):
    text = SCENARIO
    if line.startswith("[state]"):
        text = text.split("[state]")[0] + line + "\n"
    else:
        key = line.split(" =")[0]
        text = "\n".join(line if l.startswith(f"{key} =") else l for l in text.splitlines()) + "\n"
    (work / "s.toml").write_text(text)
    proc = cli("orbit", "s.toml", cwd=work)
    refused(proc, "creds")
    assert "hunter2" not in proc.stderr + proc.stdout and "SECRET" not in proc.stderr + proc.stdout


def test_etc_passwd_is_not_echoed(work):
    passwd = Path("/etc/passwd")
    if not passwd.is_file():
        pytest.skip("no /etc/passwd here")
    first = passwd.read_text().splitlines()[0]
    for line in ('vehicle = "/etc/passwd"', 'vehicle = "../../../../../../../../etc/passwd"'):
        (work / "s.toml").write_text(SCENARIO.replace('vehicle = "craft.toml"', line))
        proc = cli("orbit", "s.toml", cwd=work)
        refused(proc, "passwd")
        assert first not in proc.stderr
    (work / "s.toml").write_text('body = "earth"\n[state]\nopm = "/etc/passwd"\n')
    proc = cli("orbit", "s.toml", cwd=work)
    refused(proc, "passwd", "CCSDS_OPM_VERS")
    assert first not in proc.stderr and first[:10] not in proc.stderr


@contextmanager
def hang_guard(seconds=20.0):
    """Fail instead of hanging (a read of /dev/zero or of a pipe would never end)."""
    def alarm(signum, frame):
        raise TimeoutError(f"no answer after {seconds:g} s")
    old = signal.signal(signal.SIGALRM, alarm)
    signal.setitimer(signal.ITIMER_REAL, seconds)
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0.0)
        signal.signal(signal.SIGALRM, old)


def _special(work, special):
    if special == "FIFO":
        target = work / "pipe"
        os.mkfifo(target)
    elif special == "FOLDER":
        target = work / "folder"
        target.mkdir()
    else:
        target = Path(special)
        if not target.exists():
            pytest.skip(f"no {special} here")
    return target


@pytest.mark.parametrize("special", ["/dev/zero", "FIFO", "FOLDER"])
@pytest.mark.parametrize("slot", ["vehicle", "body", "opm", "scenario", "after"])
def test_devices_pipes_and_folders_are_refused_without_hanging(work, special, slot):
    target = _special(work, special)
    earth = load_body("earth")
    if slot in ("vehicle", "body"):
        (work / "s.toml").write_text(SCENARIO.replace(f'{slot} = "{"craft.toml" if slot == "vehicle" else "earth"}"',
                                                      f'{slot} = "{target}"'))
        call = lambda: load_scenario(work / "s.toml")  # noqa: E731
    elif slot == "opm":
        (work / "s.toml").write_text(f'body = "earth"\n[state]\nopm = "{target}"\n')
        call = lambda: load_scenario(work / "s.toml")  # noqa: E731
    elif slot == "scenario":
        call = lambda: load_scenario(target)  # noqa: E731
    else:  # the post-burn state of `session record --after FILE`
        call = lambda: load_state_file(target, earth)  # noqa: E731
    with hang_guard(), pytest.raises(ValueError, match="regular file|folder") as info:
        call()
    assert target.name in str(info.value) and "\n" not in str(info.value)


@pytest.mark.parametrize("special, args", [
    ("FIFO", ("plan", "{target}")),
    ("/dev/zero", ("orbit", "s.toml")),
    ("FIFO", ("session", "record", "c.burn", "--burn", "1", "--after", "{target}")),
])
def test_devices_and_pipes_on_the_command_line(work, special, args):
    target = _special(work, special)
    (work / "s.toml").write_text(f'body = "earth"\n[state]\nopm = "{target}"\n')
    Session.create(work / "c.burn", load_scenario(work / "scenario.toml")).close()
    # the timeout of cli() is the hang guard
    proc = cli(*(a.format(target=target) for a in args), cwd=work)
    refused(proc, target.name, "regular file")
