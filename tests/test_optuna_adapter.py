"""optuna's private API stays behind one adapter module, and it is still there in the installed optuna.

A new optuna that renames or reshapes one of those names makes the first test fail with the exact
name to look at; the others keep every other module off optuna's private names, and keep the pinned
range in pyproject.toml in step with the adapter's tested range.
"""

from __future__ import annotations

import re
import threading
import warnings
from pathlib import Path

import optuna
from packaging.specifiers import SpecifierSet
from packaging.version import Version

from optmatch.running import optuna_adapter

ROOT = Path(__file__).resolve().parents[1]
PRIVATE = re.compile(r"\._storage\b|\._study_id\b|\._trial_id\b|optuna\.storages\._|_get_stale_trial_ids|"
                     r"\._lock_file\b|\._backend\b|\._replay_result\b")


def test_the_private_names_the_adapter_uses_still_exist() -> None:
    problems = optuna_adapter.private_api_problems()
    assert problems == [], (
        "optuna's private API changed under optmatch/running/optuna_adapter.py; adapt it (or pin optuna "
        "below this version in pyproject.toml):\n  " + "\n  ".join(problems))


def test_no_other_module_touches_optuna_private_names() -> None:
    adapter = ROOT / "optmatch" / "running" / "optuna_adapter.py"
    offenders = []
    for path in sorted((ROOT / "optmatch").rglob("*.py")):
        if path == adapter:
            continue
        for number, line in enumerate(path.read_text(encoding="utf-8").splitlines(), start=1):
            if PRIVATE.search(line.split("#", 1)[0]):
                offenders.append(f"{path.relative_to(ROOT)}:{number}: {line.strip()}")
    assert offenders == [], "use optmatch.running.optuna_adapter instead:\n  " + "\n  ".join(offenders)


def test_pyproject_pins_the_tested_range_and_the_installed_optuna_is_in_it() -> None:
    text = (ROOT / "pyproject.toml").read_text(encoding="utf-8")
    (pin,) = re.findall(r'"optuna([^"]*)"', text)
    assert SpecifierSet(pin) == SpecifierSet(optuna_adapter.TESTED_OPTUNA)
    assert Version(optuna.__version__) in SpecifierSet(pin), f"optuna {optuna.__version__} is outside {pin}"


def test_a_trial_interrupted_inside_its_heartbeat_leaves_no_thread_that_blocks_exit(tmp_path: Path) -> None:
    # An interpreter waits at exit for every non-daemon thread: a beat left running after Ctrl-C kept
    # an interrupted batch alive forever.  The beat must stop with its block, and be a daemon meanwhile.
    from optmatch.running.storage import open_journal

    storage = open_journal(tmp_path / "journal.log")
    ost = optuna.create_study(storage=storage, study_name="beat")
    with warnings.catch_warnings():  # optuna's note that heartbeats are meant for optimize(): we ask()
        warnings.filterwarnings("ignore", message="Heartbeat of storage", category=UserWarning)
        trial = ost.ask()
    seen: list[threading.Thread] = []
    try:
        with optuna_adapter.heartbeat(trial, storage):
            seen = [t for t in threading.enumerate() if t.name.startswith("optmatch-heartbeat")]
            raise KeyboardInterrupt
    except KeyboardInterrupt:
        pass
    assert len(seen) == 1 and seen[0].daemon
    seen[0].join(timeout=5.0)
    assert not seen[0].is_alive()
    assert optuna_adapter.has_heartbeat(storage)
    assert storage.stale_trial_ids(optuna_adapter.study_id(ost)) == []  # it beat: the trial is not stale
