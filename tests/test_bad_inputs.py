"""Run every case of the bad-input corpus (tests/bad_inputs.py) through the command line,
in-process: exit code, one line without a traceback naming the key or file, and nothing
in the case's folder lost or changed."""
from __future__ import annotations

import os

import pytest

from bad_inputs import CASES
from fillstress.cli import main
from tiny_site import tree_hashes


@pytest.mark.parametrize("case", CASES, ids=[c.id for c in CASES])
def test_bad_input(case, tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    monkeypatch.delenv("DISPLAY", raising=False)
    monkeypatch.setattr("fillstress.solve.distributed.SCHEDULER_TIMEOUT_S", 1)
    argv = case.build(tmp_path)
    before = tree_hashes(tmp_path)
    try:
        code = main(argv)
    except SystemExit as exc:          # usage errors exit through argparse
        code = exc.code
    out, err = capsys.readouterr()
    assert code == case.exit, err
    assert "Traceback" not in err + out
    for text in case.absent:
        assert text not in err + out
    after = tree_hashes(tmp_path)
    if case.exit:
        assert err.endswith("\n") and err.count("\n") == 1, err
        assert err.startswith("fillstress: error: ")
        for text in case.names:
            assert text in err, (text, err)
        assert after == before                         # nothing lost, nothing added
    else:
        if case.warns:
            warning = [line for line in (err + out).splitlines() if "warning:" in line]
            assert warning and case.warns in " ".join(warning), err
        added = {p.split("/")[0] for p in after} - {p.split("/")[0] for p in before}
        assert added == set(case.creates), added
        assert {k: v for k, v in after.items() if k in before} == before
        for rel in case.forbids:
            assert not (tmp_path / rel).exists(), rel


def test_corpus_is_large_and_ids_unique():
    assert len(CASES) >= 80
    assert len({c.id for c in CASES}) == len(CASES)
    assert {c.area for c in CASES} >= {"site file", "reader", "numbers", "command line"}
    for c in CASES:
        assert c.exit == 0 or c.names, c.id          # every refusal names something
    assert os.name == "posix"                        # FIFOs, /dev/zero and /sys cases
