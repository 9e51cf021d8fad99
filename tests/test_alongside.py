"""Checks on a spare core (closedform.workers.start_alongside, registry.run_checks with
``alongside``): a helper process gives back its value or says how it was lost, is ended when
its caller leaves or dies, counts in the case's memory; the checks of a long history run with
a helper are the checks run one after the other, in the same order, and a lost helper's
family is run in the caller instead."""

from __future__ import annotations

import os
import signal
import time

import pytest

from closedform.checks import registry
from closedform.checks.base import Check
from closedform.derivation import derive, result_dictionary
from closedform.workers import Lost, _over_budget, _resident, fork_available, start_alongside

from .conftest import long_table_case

pytestmark = pytest.mark.skipif(not fork_available(), reason="helpers need fork")


def _gone(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return True
    return False


def _fail() -> None:
    raise ValueError("wrong on purpose")


def _killed() -> None:
    os.kill(os.getpid(), signal.SIGKILL)


def test_a_helper_gives_back_its_value():
    helper = start_alongside(divmod, (17, 5))
    assert helper.pid != os.getpid()
    assert helper.result() == (3, 2)
    assert helper.result() == (3, 2)          # asked again: the same value, no second wait
    assert _gone(helper.pid)                  # reaped, not a zombie


def test_a_helper_that_raises_or_is_killed_is_lost_and_says_how():
    raised = start_alongside(_fail).result()
    assert isinstance(raised, Lost)
    assert raised.reason == "the helper failed (ValueError: wrong on purpose)"
    killed = start_alongside(_killed).result()
    assert isinstance(killed, Lost)
    assert "helper process was killed by SIGKILL" in killed.reason


def test_a_helper_still_running_is_ended_when_its_caller_leaves():
    with pytest.raises(RuntimeError):
        with start_alongside(time.sleep, (60,)) as helper:
            raise RuntimeError("the time budget ran out")    # as _Expired would
    assert _gone(helper.pid)
    assert isinstance(helper.result(), Lost)


def test_a_helper_ends_itself_when_its_parent_is_gone(tmp_path):
    """A worker ended for its budget (SIGTERM, then SIGKILL) leaves no helper running."""
    pid_file = tmp_path / "helper"
    middle = os.fork()
    if middle == 0:                                  # a worker that starts a helper, then dies
        helper = start_alongside(time.sleep, (60,))
        pid_file.write_text(str(helper.pid))
        os.kill(os.getpid(), signal.SIGKILL)
    os.waitpid(middle, 0)
    helper_pid = int(pid_file.read_text())
    deadline = time.monotonic() + 5
    while not _gone(helper_pid) and time.monotonic() < deadline:
        time.sleep(0.05)
    assert _gone(helper_pid)


def _hold(megabytes: int, seconds: float) -> int:
    block = bytearray(megabytes << 20)
    for i in range(0, len(block), 4096):
        block[i] = 1                                 # touched: private, resident
    time.sleep(seconds)
    return len(block)


@pytest.mark.skipif(not os.path.exists(f"/proc/{os.getpid()}/task/{os.getpid()}/children"),
                    reason="no /proc children list")
def test_the_memory_of_a_worker_includes_that_of_its_helper():
    before = _resident(os.getpid())
    with start_alongside(_hold, (64, 3)) as helper:
        deadline = time.monotonic() + 2.5
        grown = before
        while grown - before < 60 << 20 and time.monotonic() < deadline:
            time.sleep(0.05)
            grown = _resident(os.getpid())
        assert grown - before >= 60 << 20
        assert helper.result() == 64 << 20


def test_the_cheap_bound_decides_only_what_the_pages_would():
    """The resident set and swap bound the pages from above: under it nothing is over the
    budget; past it the pages decide."""
    pid = os.getpid()
    pages = _resident(pid)
    assert _over_budget(pid, pages // 2)
    assert not _over_budget(pid, pages * 2 + (64 << 20))
    with start_alongside(_hold, (64, 1)):
        time.sleep(0.5)
        assert _over_budget(pid, pages // 2)


class _Long:
    pieces = tuple(range(registry.ALONGSIDE_PIECES + 1))


def _families(pid_check):
    def family(name, alongside=False):
        def run(response):
            return [Check(f"{name} check", True, f"run in {pid_check()}")]
        return registry.CheckFamily(name, frozenset({registry.DERIVE}), run,
                                    alongside=alongside)
    return (family("first"), family("second", alongside=True), family("third"))


def test_a_family_marked_alongside_runs_in_a_helper_in_its_place(monkeypatch):
    here = os.getpid()
    monkeypatch.setattr(registry, "FAMILIES",
                        _families(lambda: "here" if os.getpid() == here else "a helper"))
    checks = registry.run_checks(_Long(), registry.DERIVE, alongside=True)
    assert [(c.name, c.detail) for c in checks] == [
        ("first check", "run in here"), ("second check", "run in a helper"),
        ("third check", "run in here")]
    # without a spare core, or for a short history: all here
    for response, alongside in ((_Long(), False), (object(), True)):
        checks = registry.run_checks(response, registry.DERIVE, alongside=alongside)
        assert [c.detail for c in checks] == ["run in here"] * 3


def test_a_lost_helper_has_its_family_run_here(monkeypatch):
    here = os.getpid()

    def where():
        if os.getpid() != here:
            os.kill(os.getpid(), signal.SIGKILL)     # the helper dies (say, out of memory)
        return "here"
    monkeypatch.setattr(registry, "FAMILIES", _families(where))
    checks = registry.run_checks(_Long(), registry.DERIVE, alongside=True)
    assert [(c.name, c.detail) for c in checks] == [
        ("first check", "run in here"), ("second check", "run in here"),
        ("third check", "run in here")]


def test_a_long_history_checked_with_a_helper_gets_the_same_result():
    """The whole JSON result (every check's figures, every number) is that of the checks
    run one after the other: the helper runs the same code on the same derivation."""
    case = long_table_case(60)
    alone = result_dictionary(derive(case))
    helped = result_dictionary(derive(case, spare_core=True))
    assert len(alone["pieces"]) > registry.ALONGSIDE_PIECES
    assert helped == alone
    assert helped["status"] == "verified"
    assert any(c["name"].startswith("ode residual on") for c in helped["checks"])


def test_a_core_is_spare_when_fewer_cases_run_at_once_than_there_are_cores(monkeypatch):
    from closedform.batch import spare_core

    monkeypatch.setattr(os, "cpu_count", lambda: 4)
    assert spare_core(None, 1) and spare_core(None, 3) and spare_core(2, 1)
    assert not spare_core(None, 4) and not spare_core(None, 12) and not spare_core(4, 5)
    assert not spare_core(2, 10) and not spare_core(1, 1)     # --jobs 1: one process
    monkeypatch.setattr(os, "cpu_count", lambda: 1)
    assert not spare_core(None, 1)


def test_a_time_budget_that_runs_out_while_the_helper_works_names_its_family_and_ends_it(
        monkeypatch):
    from closedform.budget import time_budget
    from closedform.errors import TimeBudgetExceeded

    def family(name, seconds, alongside=False):
        def run(response):
            time.sleep(seconds)
            return [Check(name, True, "")]
        return registry.CheckFamily(name, frozenset({registry.DERIVE}), run, alongside=alongside)
    monkeypatch.setattr(registry, "FAMILIES", (family("slow", 60, alongside=True),
                                               family("quick", 0.01)))
    before = set(_children_of_here())
    with pytest.raises(TimeBudgetExceeded, match="the stage 'slow' ran past the time budget"):
        with time_budget(0.5, "case.toml") as budget:
            registry.run_checks(_Long(), registry.DERIVE, stage=budget.stage, alongside=True)
    assert set(_children_of_here()) == before          # the helper was ended and reaped


def _children_of_here() -> list[int]:
    from closedform.workers import _children

    return _children(os.getpid())
