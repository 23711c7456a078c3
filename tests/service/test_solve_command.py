"""`boundwise solve`: JSON lines per improvement, a final result with --json, exit 2 on a bad request."""

from __future__ import annotations

import json
import math
import subprocess
import sys

import pytest

from service.cli import main

# An invented demo floor: picker robot from the dock to a shelf behind a rack row.
FLOOR = {
    "problem": {"domain": "grid", "rows": [".........", ".#######.", ".........", "...2222..", "........."],
                "start": [0, 0], "goals": [[4, 8]]},
    "search": {"weight": 3.0},
}


def _write(tmp_path, doc):
    path = tmp_path / "request.json"
    path.write_text(json.dumps(doc))
    return str(path)


def test_solve_prints_improvements_and_a_final_result(tmp_path, capsys):
    code = main(["solve", _write(tmp_path, FLOOR), "--json", "--weight", "1"])
    out = capsys.readouterr().out.splitlines()
    assert code == 0
    lines = [json.loads(x) for x in out]
    assert lines[-1]["type"] == "result"
    result = lines[-1]
    for key in ("cost", "lower_bound", "bound", "proven_optimal", "proven_infeasible", "stop_reason",
                "expansions", "elapsed_s", "plan", "improvements"):
        assert key in result
    assert [x["type"] for x in lines[:-1]] == ["improvement"] * len(result["improvements"])
    assert result["proven_optimal"] and result["stop_reason"] == "exhausted"
    # the shortest route, checked by hand: 8 east-ish steps with one diagonal around the rack is
    # compared to networkx below rather than typed in.
    import networkx as nx  # source: networkx Dijkstra on the same 8-connected floor

    rows = FLOOR["problem"]["rows"]
    g = nx.Graph()
    for r, row in enumerate(rows):
        for c, ch in enumerate(row):
            if ch == "#":
                continue
            for dr, dc in ((0, 1), (1, 0), (1, 1), (1, -1)):
                nr, nc = r + dr, c + dc
                if 0 <= nr < len(rows) and 0 <= nc < len(row) and rows[nr][nc] != "#":
                    if dr and dc and (rows[r + dr][c] == "#" or rows[r][c + dc] == "#"):
                        continue
                    cost = 1.0 if rows[nr][nc] == "." else float(rows[nr][nc])
                    back = 1.0 if ch == "." else float(ch)
                    k = math.sqrt(2) if dr and dc else 1.0
                    g.add_edge((r, c), (nr, nc), fw=cost * k, bw=back * k)
    dg = nx.DiGraph()
    for u, v, d in g.edges(data=True):
        dg.add_edge(u, v, weight=d["fw"])
        dg.add_edge(v, u, weight=d["bw"])
    assert result["cost"] == pytest.approx(nx.dijkstra_path_length(dg, (0, 0), (4, 8)))


def test_flags_override_the_document(tmp_path, capsys):
    code = main(["solve", _write(tmp_path, FLOOR), "--json", "--max-expansions", "1"])
    result = json.loads(capsys.readouterr().out.splitlines()[-1])
    assert code == 0 and result["expansions"] <= 1
    assert result["stop_reason"] in ("expansions", "exhausted")


@pytest.mark.parametrize("doc, needle", [
    ({"problem": {**FLOOR["problem"], "start": [1, 1]}}, "problem.start"),
    ({"problem": FLOOR["problem"], "budget": {"expansions": 2.5}}, "budget.expansions"),
    ({"problem": {"domain": "teleport"}}, "problem.domain"),
])
def test_bad_request_exits_2_with_the_field_on_stderr(tmp_path, capsys, doc, needle):
    code = main(["solve", _write(tmp_path, doc)])
    captured = capsys.readouterr()
    assert code == 2 and needle in captured.err and captured.out == ""


def test_unreadable_input_exits_2(tmp_path, capsys):
    bad = tmp_path / "bad.json"
    bad.write_text("{not json")
    assert main(["solve", str(bad)]) == 2
    assert "not JSON" in capsys.readouterr().err
    assert main(["solve", str(tmp_path / "missing.json")]) == 2


def test_console_script_runs_as_a_process(tmp_path):
    proc = subprocess.run([sys.executable, "-m", "service.cli", "solve", _write(tmp_path, FLOOR), "--json"],
                          capture_output=True, text=True, timeout=60)
    assert proc.returncode == 0, proc.stderr
    result = json.loads(proc.stdout.splitlines()[-1])
    assert result["cost"] is not None and result["bound"] >= 1.0
