"""The HTML report's headline states a screen's decision on the unit beside the run's verdict,
and its colour and title follow the decision: a simple-rule pass within U of its limit is no
clean "no fault found" for a returned unit (ILAC-G8:09/2019 calls such a result conditional).
The exit code of ``rig run`` stays on the verdict, as scripts read it.

Each decision is worked out again here from the stored readings, limits and expanded
uncertainties alone.  Real runs of the shipped NTC sender screen (an edited copy judged by the
simple rule) on the virtual bench (its meter over real TCP, its relay box on a real pty) into a
real SQLite file; serials and drifts invented."""

from __future__ import annotations

import contextlib
import html
import io
import json
import re

import pytest
from bench_helpers import SEQUENCES, shipped_bench
from test_console_decision import decided_from_steps

from rig.cli import main
from rig.store import ResultStore

# the sender as returned: good, drifted 0.5 % inside its 5 % tolerance, drifted far beyond it
UNITS = {"R-GOOD": (), "R-EDGE": ("drift:sender=+4.5%",), "R-BAD": ("drift:sender=+20%",)}
# the page's colour of each decision: green, red, amber (common practice, no published source)
COLOUR = {
    "no fault found": "d-clear",
    "confirmed failure": "d-confirmed",
    "inconclusive": "d-inconclusive",
}
HEADLINE = re.compile(r'<p id="headline"><span class="([^"]*)">(.*?)</span>(.*?)</p>')


def _headline(page: str) -> tuple[str, str, str]:
    """(colour class, the coloured text, the text after it) of the page's headline, as read."""
    found = HEADLINE.search(page)
    assert found is not None, page[:2000]
    colour, shown, after = found.groups()
    return colour, html.unescape(re.sub("<[^>]+>", "", shown)), html.unescape(after)


def _title(page: str) -> str:
    found = re.search(r"<title>(.*?)</title>", page)
    assert found is not None
    return html.unescape(found.group(1))


@pytest.fixture(scope="module")
def reported(
    tmp_path_factory: pytest.TempPathFactory,
) -> dict[str, tuple[int, str, str, str]]:
    """{serial: (rig run's exit code, its JSON decision, the HTML page, the decision worked
    out from the stored steps)}."""
    folder = tmp_path_factory.mktemp("headline")
    text = (SEQUENCES / "ntc-sender-screen.toml").read_text(encoding="utf-8")
    sequence = folder / "ntc-sender-screen-simple.toml"
    sequence.write_text(text.replace('decision_rule = "guarded"', 'decision_rule = "simple"', 1))
    runs: dict[str, tuple[int, str]] = {}
    for serial, faults in UNITS.items():
        with shipped_bench("ntc-sender", faults, folder=folder) as (_, station):
            args = ["run", str(sequence), "--station", str(station.path), "--serial", serial]
            out = io.StringIO()
            with contextlib.redirect_stdout(out):
                code = main([*args, "--yes", "--json"])
            runs[serial] = (code, json.loads(out.getvalue())["screen_decision"]["decision"])
    store = ResultStore(station.store_path)
    try:
        ids = {r["serial"]: r["id"] for r in store.runs()}
        worked = {s: decided_from_steps(store.steps(ids[s])) for s in UNITS}
    finally:
        store.close()
    found = {}
    for serial, (code, decision) in runs.items():
        page = io.StringIO()
        with contextlib.redirect_stdout(page):
            report = ["report", str(ids[serial]), "--station", str(station.path), "--out", "-"]
            assert main(report) == 0
        found[serial] = (code, decision, page.getvalue(), worked[serial])
    return found


def test_an_inconclusive_pass_heads_its_report_as_inconclusive_beside_the_pass(
    reported: dict[str, tuple[int, str, str, str]],
) -> None:
    code, decision, page, worked = reported["R-EDGE"]
    assert decision == worked == "inconclusive"
    colour, shown, after = _headline(page)
    assert shown == "Verdict: PASS · Screen decision: inconclusive"
    assert colour == COLOUR["inconclusive"]  # amber, not a pass's green
    assert "within its U of" in after and "retest" in after
    assert _title(page).endswith("(pass; screen decision: inconclusive)")
    # the exit code stays on the verdict: 0 for a pass, whatever the decision
    assert code == 0


def test_every_screens_headline_states_its_decision_beside_its_verdict(
    reported: dict[str, tuple[int, str, str, str]],
) -> None:
    # the bench gave the three cases, as the stored readings show
    assert {s: worked for s, (_, _, _, worked) in reported.items()} == {
        "R-GOOD": "no fault found",
        "R-EDGE": "inconclusive",
        "R-BAD": "confirmed failure",
    }
    verdicts = {"R-GOOD": ("PASS", 0), "R-BAD": ("FAIL", 1), "R-EDGE": ("PASS", 0)}
    for serial, (code, decision, page, worked) in reported.items():
        colour, shown, _ = _headline(page)
        verdict, exit_code = verdicts[serial]
        assert decision == worked
        assert shown == f"Verdict: {verdict} · Screen decision: {worked}", serial
        assert colour == COLOUR[worked], serial
        assert _title(page).endswith(f"({verdict.lower()}; screen decision: {worked})")
        assert code == exit_code, serial
