"""Tests of the command line for ``mount`` and ``rank``.

The commands run through :func:`engine.cli.main` in this process, on a copy of the
fitted demo library (``demo_library`` in conftest.py) that ``demo`` has been run on:
``mount``, ``rank`` and one bad-input case once for the module (their results are
shared by the tests that read them), further bad-input cases in their own tests.
The mount figures are checked against the single-degree-of-freedom isolator (Snowdon
1968), the static-deflection estimate fn = (1/2 pi) sqrt(g/delta) (common practice) and
the shape factor of a bonded disc (Gent & Lindley 1959). Bad input must exit with
status 2 and one line on stderr (the CLI contract).
"""

from __future__ import annotations

import hashlib
import json
import math
import re
import shutil
from pathlib import Path

import pytest

from engine.cli import main
from tests.helpers import invoke

G0 = 9.80665  # standard gravity [m/s2], CGPM 1901
WINDOW = ["--temp-range", "-20", "45", "--freq-range", "10", "100"]
MOUNT = [
    "mount",
    "BW-NR40",
    "--layout",
    "compression",
    "--mass",
    "180",
    "--mounts",
    "4",
    "--area-mm2",
    "2000",
    "--thickness-mm",
    "25",
    "--temp",
    "23",
    "--disturbance-hz",
    "24.7",
    "--json",
]


def _digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


@pytest.fixture(scope="module")
def cli(demo_library, tmp_path_factory):
    """A copy of the demo library with ``demo`` run on it, and the commands whose
    results several tests read, each run once."""
    tmp = tmp_path_factory.mktemp("cli")
    db = tmp / "library.sqlite"
    shutil.copyfile(demo_library.location, db)
    demo = invoke(["demo", "--json", "--db", db])
    assert demo.returncode == 0, demo.stderr
    design = tmp / "mount.json"
    design.write_text(json.dumps({"thickness_mm": 25, "target_fn_Hz": 10.0}))
    cases = {
        "mount": MOUNT,
        "rank": ["rank", *WINDOW, "--screening", "--json"],
        "rank_mount": ["rank", *WINDOW, "--allow-extrapolation", "--mount", str(design), "--json"],
        "rank_isolation": ["rank", *WINDOW, "--mount", str(design), "--json"],
        "inverted": ["rank", "--temp-range", "45", "-20", "--freq-range", "10", "100"],
    }
    before = _digest(db)
    runs = {}
    for name, args in cases.items():
        run = invoke([*args, "--db", db])
        runs[name] = (run.returncode, run.stdout, run.stderr)
    return {"demo": demo.json(), "runs": runs, "db": db, "before": before}


def _ok_json(cli, name):
    code, out, err = cli["runs"][name]
    assert code == 0, err
    return json.loads(out)


# ------------------------------------------------------------------ mount


def test_mount_json_keys(cli):
    data = _ok_json(cli, "mount")
    for key in (
        "natural_frequency_Hz",
        "transmissibility",
        "static_deflection_mm",
        "loss_factor_at_resonance",
        "amplification_at_resonance",
        "isolation_onset_Hz",
        "static_strain",
        "area_mm2",
        "shape_factor",
        "mass_per_mount_kg",
    ):
        assert key in data, key
    assert data["id"] == "BW-NR40"
    assert data["layout"] == "compression"
    assert data["mass_per_mount_kg"] == pytest.approx(45.0)  # 180 kg on 4 pads


def test_mount_figures_are_physically_consistent(cli):
    d = _ok_json(cli, "mount")
    fn, delta = d["natural_frequency_Hz"], d["static_deflection_mm"] * 1e-3
    # fn from the static deflection, (1/2 pi) sqrt(g / delta) (common practice). Rubber
    # is stiffer dynamically than statically, so the real fn lies at or above it, and
    # for a soft rubber well above Tg within a factor of about 1.5.
    fn_static = math.sqrt(G0 / delta) / (2.0 * math.pi)
    assert fn_static <= fn <= 1.5 * fn_static
    # At fn, k' = m (2 pi fn)^2 and T = sqrt(1 + eta^2)/eta (Snowdon 1968).
    eta = d["loss_factor_at_resonance"]
    assert 0.0 < eta < 1.0
    assert d["amplification_at_resonance"] == pytest.approx(math.sqrt(1 + eta**2) / eta, rel=1e-6)
    # T = 1 at sqrt(2) fn for hysteretic damping; the disturbance lies above it, so the
    # pad isolates (Snowdon 1968).
    assert d["isolation_onset_Hz"] == pytest.approx(math.sqrt(2.0) * fn, rel=1e-9)
    assert 24.7 > d["isolation_onset_Hz"]
    assert 0.0 < d["transmissibility"] < 1.0
    # Static strain = deflection / rubber thickness (25 mm).
    assert d["static_strain"] == pytest.approx(d["static_deflection_mm"] / 25.0, rel=1e-9)
    # Bonded disc of 2000 mm2, 25 mm thick: S = D/(4h) = 0.5046 (Gent & Lindley 1959).
    diameter = math.sqrt(4.0 * 2000.0 / math.pi)
    assert d["shape_factor"] == pytest.approx(diameter / 100.0, rel=1e-9)
    assert d["shape_factor"] == pytest.approx(0.5046, abs=5e-5)
    assert d["area_mm2"] == pytest.approx(2000.0)


def test_mount_bad_layout_exits_2(cli, capsys):
    with pytest.raises(SystemExit) as stop:
        main([*MOUNT[:3], "torsion", *MOUNT[4:], "--db", str(cli["db"])])
    assert stop.value.code == 2
    out, err = capsys.readouterr()
    assert out == ""
    assert len(err.strip().splitlines()) == 1
    assert "invalid choice: 'torsion'" in err


def _mount_args(mass=None, temps=None, json_out=True):
    """MOUNT with another total mass, other temperatures, or as text."""
    args = list(MOUNT)
    if mass is not None:
        args[args.index("--mass") + 1] = mass
    if temps is not None:
        at = args.index("--temp") + 1
        args[at : at + 1] = temps
    if not json_out:
        args.remove("--json")
    return args


@pytest.fixture(scope="module")
def mount_runs(cli):
    """The README's mount in text at three temperatures, and an impossible load (1e9 kg)
    in JSON and text, each run once."""
    db = cli["db"]
    return {
        "text": invoke([*_mount_args(temps=["-20", "23", "45"], json_out=False), "--db", db]),
        "heavy": invoke([*_mount_args(mass="1e9"), "--db", db]),
        "heavy_text": invoke([*_mount_args(mass="1e9", json_out=False), "--db", db]),
    }


def test_mount_json_has_the_verdict_and_the_static_figures(cli):
    # The verdict is a result (exit 0, the CLI contract); the dynamic-to-static ratio
    # k'(fn)/k_static exceeds 1 for a rubber (common practice), and fn is sqrt(ratio)
    # times the static-deflection estimate (1/2 pi) sqrt(g/delta) (common practice).
    d = _ok_json(cli, "mount")
    assert d["verdict"] in ("passes", "fails")
    assert (d["verdict"] == "passes") == (d["verdict_reasons"] == [])
    ratio = d["dynamic_to_static_ratio"]
    assert ratio > 1.0
    fn_static = math.sqrt(G0 / (d["static_deflection_mm"] * 1e-3)) / (2.0 * math.pi)
    assert d["natural_frequency_Hz"] == pytest.approx(math.sqrt(ratio) * fn_static, rel=1e-6)
    # 45 kg on 2000 mm2: 0.22 MPa against the 1 MPa limit (common practice)
    assert d["static_stress_MPa"] == pytest.approx(45.0 * G0 / 2000e-6 * 1e-6, rel=1e-9)
    assert d["stress_limit_MPa"] == 1.0
    assert d["long_term_strain"] >= d["static_strain"] * (1 - 1e-9)


def test_mount_text_starts_with_the_verdict_and_gives_the_key_figures(mount_runs):
    run = mount_runs["text"]
    assert run.returncode == 0, run.stderr
    lines = run.stdout.splitlines()
    assert re.fullmatch(r"BW-NR40: (passes|fails — .+)", lines[0]), lines[0]
    for t in ("-20.0 °C", "23.0 °C", "45.0 °C"):
        line = next(x for x in lines if x.strip().startswith(t))
        for figure in (
            "fn ",
            "T = ",
            "amplification at resonance",
            "static strain",
            "dynamic/static stiffness",
        ):
            assert figure in line, (figure, line)
    assert any(x.strip().startswith("long-term sag ") for x in lines)


def test_mount_with_an_impossible_load_fails_plainly(mount_runs):
    # 1e9 kg on four pads: a failure with a reason a person can act on, exit 0 (a
    # computed verdict), no natural frequency of "0.00 Hz".
    heavy, text = mount_runs["heavy"], mount_runs["heavy_text"]
    assert heavy.returncode == 0 and text.returncode == 0, heavy.stderr + text.stderr
    data = heavy.json()
    assert data["verdict"] == "fails"
    assert data["verdict_reasons"][0].startswith("cannot carry the load: static strain ")
    first = text.stdout.splitlines()[0]
    assert first.startswith("BW-NR40: fails — cannot carry the load: static strain ")
    assert "fn 0.00" not in text.stdout and "T = 0.000" not in text.stdout


# ------------------------------------------------------------------ rank


def test_rank_json_shortlist_and_excluded(cli):
    data = _ok_json(cli, "rank")
    shortlist, excluded = data["shortlist"], data["excluded"]
    assert shortlist, "the demo library has grades that pass"
    n = len(shortlist)
    assert [r["rank"] for r in shortlist] == list(range(1, n + 1))
    for r in shortlist:
        assert r["passed"] is True and r["failures"] == []
        assert r["reason"].startswith(f"rank {r['rank']} of {n}: ")
        assert "material screening only" in r["reason"]
        assert set(r["indices"]) == {"loss_factor", "stiffness_drift"}  # screening defaults
    for r in excluded:
        assert r["rank"] is None and r["passed"] is False
        assert r["reason"].startswith("excluded: ") and r["failures"]
    assert sorted(r["id"] for r in shortlist + excluded) == sorted(cli["demo"]["fitted"])
    assert [r["id"] for r in excluded] == sorted(r["id"] for r in excluded)
    assert data["criteria"]["window"]["temp_range"] == [-20.0, 45.0]
    assert data["criteria"]["window"]["freq_range"] == [10.0, 100.0]


def test_isolation_ranking_shortlists_only_mounts_that_isolate_everywhere(cli):
    # Issue check: with the mount, no grade whose transmissibility reaches 1 anywhere in
    # the window is shortlisted, and each such grade's reason names the temperature.
    # T < 1 is isolation (Snowdon 1968); f/fn >= sqrt(2) its onset (hysteretic damping).
    data = _ok_json(cli, "rank_isolation")
    assert data["shortlist"], "pads sized for 10 Hz isolate 24.7 Hz on some demo grades"
    for r in data["shortlist"]:
        transmissibility = r["mount"]["transmissibility"]
        assert max(max(row) for row in transmissibility) < 1.0
        assert min(r["mount"]["natural_frequency_Hz"]) > 0.0
        assert 24.7 / max(r["mount"]["natural_frequency_Hz"]) >= math.sqrt(2.0)
        assert {"worst_transmissibility", "isolation_efficiency"} <= set(r["indices"])
        assert r["indices"]["isolation_efficiency"] == pytest.approx(
            1.0 - r["indices"]["worst_transmissibility"], rel=1e-12
        )
    amplifying = [
        r
        for r in data["excluded"]
        if r["mount"] and max(max(row) for row in r["mount"]["transmissibility"]) >= 1.0
    ]
    assert amplifying, "some demo grades amplify the disturbance"
    for r in amplifying:
        # A pad that cannot carry the load is excused the other mount checks: its own
        # reason names the temperature where it gives way.
        assert re.search(r"T = [\d.]+ at -?\d+ °C, 24\.7 Hz", r["reason"]) or re.search(
            r"cannot carry the load: .* at -?\d+ °C", r["reason"]
        ), r["reason"]
    assert any("T = " in r["reason"] for r in amplifying)


def test_rank_json_carries_rank_intervals_and_companions(cli):
    # The CLI contract: every grade entry has rank_interval [best, worst] (null where
    # none was computed), and index values and mount figures their _low/_high.
    for case in ("rank", "rank_mount"):
        data = _ok_json(cli, case)
        intervals = data["intervals"]
        assert intervals["draws"] == 32
        assert intervals["leading"] == [r["id"] for r in data["shortlist"]][:20]
        assert "posterior draws" in intervals["note"]
        for r in data["shortlist"]:
            best, worst = r["rank_interval"]
            assert isinstance(best, int) and isinstance(worst, int)
            assert 1 <= best <= r["rank"] <= worst <= len(data["shortlist"])
            assert set(r["indices_low"]) == set(r["indices"]) == set(r["indices_high"])
            for name, v in r["indices"].items():
                assert r["indices_low"][name] <= v <= r["indices_high"][name]
        for r in data["excluded"]:
            assert "rank_interval" in r and r["rank_interval"] is None
            assert set(r["indices_low"]) == set(r["indices"])
            assert all(v is None for v in r["indices_low"].values())
        texts = [r["reason"] for r in data["shortlist"]]
        for r, text in zip(data["shortlist"], texts, strict=True):
            # The note names a neighbour in the shortlist, and only a neighbour.
            if "within the data's uncertainty of " in text:
                named = text.split("within the data's uncertainty of ")[1].split(";")[0]
                ids = [x["id"] for x in data["shortlist"]]
                k = ids.index(r["id"])
                assert set(named.split(" and ")) <= set(ids[max(k - 1, 0) : k + 2]) - {r["id"]}
    data = _ok_json(cli, "rank_mount")
    assert data["shortlist"], "the demo library has grades that pass with the sized pad"
    for r in data["shortlist"]:
        m = r["mount"]
        for name in ("natural_frequency_Hz", "transmissibility", "static_deflection_mm"):
            assert len(m[f"{name}_low"]) == len(m[name]) == len(m[f"{name}_high"])
        for lo, v, hi in zip(
            m["natural_frequency_Hz_low"],
            m["natural_frequency_Hz"],
            m["natural_frequency_Hz_high"],
            strict=True,
        ):
            assert lo <= v <= hi
    for r in data["excluded"]:
        assert r["mount"]["natural_frequency_Hz_low"] is None
        assert r["mount"]["transmissibility_high"] is None


def test_rank_out_to_a_path_that_cannot_be_written_exits_2(cli, tmp_path, capsys):
    blocker = tmp_path / "taken"
    blocker.write_text("a file where the folder should be")
    out = blocker / "shortlist.csv"
    assert main(["rank", "--db", str(cli["db"]), *WINDOW, "--out", str(out)]) == 2
    captured = capsys.readouterr()
    assert captured.out == ""
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1, captured.err
    assert lines[0].startswith(f"error: {out}: cannot write the shortlist here: ")
    assert _digest(cli["db"]) == cli["before"]


def test_rank_excludes_grades_whose_service_range_misses_the_window(cli):
    # A grade rated from 0 or -10 degC cannot serve a window from -20 degC.
    data = _ok_json(cli, "rank")
    by_id = {r["id"]: r for r in data["shortlist"] + data["excluded"]}
    for gid in ("BW-FD30", "QC-PVC75"):
        fails = {f["constraint"]: f for f in by_id[gid]["failures"]}
        assert "service range" in fails
        assert fails["service range"]["limit"] == "to cover -20 to 45 °C"


def test_rank_inverted_range_exits_2_with_one_line(cli):
    code, out, err = cli["runs"]["inverted"]
    assert code == 2
    assert out == ""
    assert err.strip().splitlines() == ["error: temperature range 45 to -20 degC is inverted"]


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["--index", "loss_factor", "tan_delta"], "unknown merit index 'tan_delta'"),
        (["--criteria", "{tmp}/bad.json"], "bad.json: not valid JSON"),
        (["--mount", "{tmp}/nothere.json"], "nothere.json: file not found"),
        (["--pareto", "loss_factor", "damping_span"], "Pareto index 'damping_span' is not"),
        (["--screening", "--index", "frequency_drift"], "needs a mount design"),
        (["--min-isolation-efficiency", "1.5"], "must lie in"),
    ],
)
def test_rank_bad_input_exits_2_with_one_line(cli, tmp_path, capsys, args, message):
    (tmp_path / "bad.json").write_text('{"window": {"temp_range": [-20, 45]},,}')
    args = [a.replace("{tmp}", str(tmp_path)) for a in args]
    assert main(["rank", "--db", str(cli["db"]), *WINDOW, *args]) == 2
    out, err = capsys.readouterr()
    assert out == ""
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    assert message in lines[0]
    assert _digest(cli["db"]) == cli["before"]  # nothing in the library changed


def test_library_unchanged_by_the_commands(cli):
    assert _digest(cli["db"]) == cli["before"]


# ------------------------------------------------------------------ bad settings exit 2


def test_rank_criteria_with_a_text_threshold_exits_2(cli, tmp_path, capsys):
    path = tmp_path / "criteria.json"
    path.write_text('{"eta_threshold": "high"}')
    assert main(["rank", "--db", str(cli["db"]), "--criteria", str(path)]) == 2
    assert "eta_threshold" in capsys.readouterr().err


def test_rank_mount_file_with_a_text_disturbance_exits_2(cli, tmp_path, capsys):
    path = tmp_path / "mount.json"
    path.write_text('{"disturbance_Hz": "fast"}')
    assert main(["rank", "--db", str(cli["db"]), *WINDOW, "--mount", str(path)]) == 2
    assert "disturbance" in capsys.readouterr().err


@pytest.mark.parametrize(
    ("option", "message"),
    [
        (["--temp-step", "0"], "temperature step must be positive"),
        (["--freq-points", "0"], "the frequency band needs at least one point"),
    ],
)
def test_rank_zero_step_is_refused(cli, option, message, capsys):
    assert main(["rank", "--db", str(cli["db"]), *WINDOW, *option, "--json"]) == 2
    assert message in capsys.readouterr().err


def test_a_long_excluded_list_is_counted_by_limit_and_listed_on_request(cli, monkeypatch):
    # Common practice for a listing of thousands: a count per cause, the whole list on
    # request. Here the limit is lowered so the demo library's exclusions exceed it.
    from engine import cli as cli_module

    args = ["rank", *WINDOW, "--mount", str(Path(cli["db"]).parent / "mount.json")]
    listed = invoke([*args, "--db", cli["db"], "--all-excluded"])
    assert listed.returncode == 0, listed.stderr
    each = [x for x in listed.stdout.splitlines() if x.startswith("    - ")]
    ids = [x.split()[1] for x in each]
    data = invoke([*args, "--db", cli["db"], "--json"]).json()
    assert ids == [r["id"] for r in data["excluded"]] and len(ids) > 2
    monkeypatch.setattr(cli_module, "EXCLUDED_LISTED", 2)
    counted = invoke([*args, "--db", cli["db"]])
    lines = counted.stdout.splitlines()
    head = next(k for k, x in enumerate(lines) if "grade(s) excluded" in x)
    assert lines[head].strip().startswith(f"{len(ids):,} grade(s) excluded")
    counts = [
        int(x.split()[1].replace(",", "")) for x in lines[head + 1 :] if x.startswith("    - ")
    ]
    assert sum(counts) == len(ids)  # each excluded grade counted once, under its first limit
    # A mount reason's figures are left out of its name: no digit in a count's label.
    assert not any(
        re.search(r"\d", x.split(None, 2)[2]) for x in lines[head + 1 :] if x.startswith("    - ")
    )
