"""Sweeps and multi-objective search: the sweep-file grammar, variants, the evaluator on a rig
whose optimum is known in closed form, Pareto sorting, resuming, Dask against serial, the
``sweep``/``best`` commands and the review sheet's "how this design was chosen" section."""

from __future__ import annotations

import math
import textwrap
from pathlib import Path

import numpy as np
import pytest

from cablekit.cli import main
from cablekit.design import load_design
from cablekit.sweep import (SweepError, choose_best, grid_variants, load_results, load_sweep, loads_sweep,
                            non_dominated_sort, parse_path, run_sweep, variant_document)

ROOT = Path(__file__).resolve().parents[1]
EXAMPLES = ROOT / "examples"
G0 = 9.80665  # standard gravity [m/s^2] (ISO 80000-3)

# A symmetric rig: four exits at the corners of a 2 m square at height H, one task point at the
# centre, 0.5 m high; 2.5 kg moving mass; t_min 5 N; t_max 15 N from the motor:
# 0.315 N*m * gear 1 * efficiency 1 / pitch radius (40 mm + 2 mm) / 2 = 15.0 N.
RIG = """\
format = "cablekit-design/1"
[meta]
name = "symmetric four-cable test rig"
[frame]
[[frame.exits]]
name = "A"
position = "0, 0, 1.5 m"
[[frame.exits]]
name = "B"
position = "2, 0, 1.5 m"
[[frame.exits]]
name = "C"
position = "2, 2, 1.5 m"
[[frame.exits]]
name = "D"
position = "0, 2, 1.5 m"
[platform]
kind = "point"
mass = "1.5 kg"
[cable]
diameter = "2 mm"
breaking_force = "2 kN"
axial_stiffness = "200 kN"
mass_per_length = "0.02 kg/m"
min_tension = "5 N"
[winch]
drum_diameter = "40 mm"
drum_width = "40 mm"
flange_diameter = "60 mm"
grooved = true
gear_ratio = 1
efficiency = 1.0
encoder_lines = 500
decoding = 4
deadband_counts = 1
count_rate_limit = "500 kHz"
motor_rated_torque = "0.315 N*m"
motor_peak_torque = "0.5 N*m"
motor_rated_speed = "3000 rpm"
brake = true
brake_holding_torque = "0.5 N*m"
dead_wraps = 3
[payload]
mass = "1.0 kg"
[task]
points = ["1, 1, 0.5 m"]
speed = "0.2 m/s"
acceleration = "0 m/s^2"
[home]
position = "1, 1, 0.5 m"
[control]
winches = "tension"
tension_accuracy = "1 N"
"""
MG = 2.5 * G0  # [N]
T_MIN, T_MAX = 5.0, 15.0  # [N]
# quasi-static (task acceleration 0) and tension-controlled winches: the workspace margin is the
# static one less the stated tension accuracy (cablekit.workspace module notes, [control])
T_ACCURACY = 1.0  # [N]
R_H = math.sqrt(2.0)  # horizontal distance from the task point to each exit [m]

HEAD = """\
format = "cablekit-sweep/1"
design = "rig.toml"
[evaluate]
step = "100 mm"
accuracy_builds = 20
accuracy_max_poses = 10
"""


def _hand_tension(height):
    """Each cable's tension at the centre point, exits ``height`` above it [N].

    Equilibrium of a particle under four symmetric concurrent forces (Beer, Johnston et al.,
    Vector Mechanics for Engineers: Statics, ch. 2, equilibrium of a particle):
    4 T sin(alpha) = m g with sin(alpha) = h / sqrt(h^2 + r^2).  The max-margin distribution
    keeps the symmetric one (the null-space direction (1, -1, 1, -1) only lowers the margin).
    """
    h = np.asarray(height, float)
    return MG * np.sqrt(h**2 + R_H**2) / (4.0 * h)


def _hand_optimum_height() -> float:
    """Frame height with the largest margin min(T - t_min, t_max - T): T = (t_min + t_max) / 2,
    so sin(alpha*) = m g / (2 (t_min + t_max)) and h* = r tan(alpha*) (from the formula above)."""
    s = MG / (2.0 * (T_MIN + T_MAX))
    return 0.5 + R_H * s / math.sqrt(1.0 - s * s)


@pytest.fixture()
def rig_folder(tmp_path):
    (tmp_path / "rig.toml").write_text(RIG)
    return tmp_path


def _spec(folder: Path, body: str, name: str = "s.toml"):
    path = folder / name
    path.write_text(HEAD + textwrap.dedent(body))
    return load_sweep(path)


HEIGHT_GRID = """
[[parameter]]
name = "height"
path = "frame.exits[*].position[2]"
range = ["0.9 m", "2.9 m"]
step = "20 mm"
[objectives]
tension_margin = "max"
"""

# a height grid times three gear ratios, one of them invalid (-1)
HEIGHT_AND_GEAR = """
[[parameter]]
name = "height"
path = "frame.exits[*].position[2]"
range = ["1.0 m", "2.6 m"]
steps = {steps}
[[parameter]]
name = "gear"
path = "winch.gear_ratio"
values = [-1, 1, 2]
[objectives]
tension_margin = "max"
peak_motor_torque = "min"
"""



# --------------------------------------------------------------------------------------
# the grammar: paths, units, links, conditions
# --------------------------------------------------------------------------------------
def test_paths_parse_by_the_small_grammar_and_nothing_else():
    assert parse_path("frame.exits[*].position[2]") == (("frame", ()), ("exits", ("*",)), ("position", (2,)))
    assert parse_path("winch.gear_ratio") == (("winch", ()), ("gear_ratio", ()))
    for bad in ("winch.gear_ratio + 1", "__import__('os')", "frame.exits[-1]", "frame..exits", "", "a[1:2]"):
        with pytest.raises(ValueError):
            parse_path(bad)


@pytest.mark.parametrize("body, field, words", [
    ('[[parameter]]\nname = "h"\npath = "frame.exit[*].position[2]"\nvalues = ["2 m"]\n', "parameter[0] (h).path",
     "no field 'exit'"),
    ('[[parameter]]\nname = "h"\npath = "frame.exits[7].position[2]"\nvalues = ["2 m"]\n', "parameter[0] (h).path",
     "index 0 to 3"),
    ('[[parameter]]\nname = "h"\npath = "frame.exits[*].position[2]"\nvalues = ["2 kg"]\n', "parameter[0] (h).values",
     "unit of the field"),
    ('[[parameter]]\nname = "g"\npath = "winch.gear_ratio"\nvalues = ["8 mm"]\n', "parameter[0] (g).values[0]",
     "takes no unit"),
    ('[[parameter]]\nname = "d"\npath = "winch.drum_diameter[0]"\nvalues = ["40 mm"]\n', "parameter[0] (d).path",
     "neither a list nor a vector"),
    ('[[parameter]]\nname = "e"\npath = "frame.exits[0].position"\nvalues = ["1 m"]\n', "parameter[0] (e).path",
     "name one component"),
    ('[[parameter]]\nname = "h"\npath = "winch.drum_diameter"\nvalues = ["1, 2 m"]\n', "parameter[0] (h).values[0]",
     "a quantity with a unit"),
    ('[[parameter]]\nname = "d"\npath = "winch.drum_diameter"\nrange = ["40 mm", "30 mm"]\n', "parameter[0] (d).range",
     "low below high"),
    ('[[parameter]]\nname = "d"\npath = "winch.drum_diameter"\nvalues = ["40 mm"]\n'
     '[[link]]\npath = "winch.gear_ratio"\nfrom = "d"\n', "link[0].path", "unit of parameter 'd'"),
    ('[[parameter]]\nname = "d"\npath = "winch.drum_diameter"\nvalues = ["40 mm"]\n[constraints]\n'
     'tension_margin = ">= 2 m"\n', "constraints.tension_margin", "wrong dimension"),
    ('[[parameter]]\nname = "d"\npath = "winch.drum_diameter"\nvalues = ["40 mm"]\n[objectives]\nbeauty = "max"\n',
     "objectives.beauty", "a metric"),
])
def test_bad_paths_and_units_get_field_named_errors(rig_folder, body, field, words):
    if "[objectives]" not in body:
        body += '[objectives]\ntension_margin = "max"\n'
    with pytest.raises(SweepError) as err:
        _spec(rig_folder, body)
    text = str(err.value)
    assert field in text and words in text, text


def test_a_malformed_scheduler_address_exits_3(rig_folder, tmp_path, capsys):
    (rig_folder / "a.toml").write_text(HEAD + HEIGHT_GRID)
    for address in ("not an address", "http://127.0.0.1:8786"):
        assert main(["sweep", str(rig_folder / "a.toml"), "-o", str(tmp_path / "out"), "--scheduler", address]) == 3
        assert "expected the address of a running Dask scheduler" in capsys.readouterr().err


def test_bad_sweep_file_exits_3_naming_the_field(rig_folder, tmp_path, capsys):
    (rig_folder / "bad.toml").write_text(HEAD + '[[parameter]]\nname = "h"\npath = "winch.gear_ratio"\n'
                                         'values = ["8 m"]\n[objectives]\ncoverage = "max"\n')
    assert main(["sweep", str(rig_folder / "bad.toml"), "-o", str(tmp_path / "out"), "--serial"]) == 3
    assert "parameter[0] (h).values[0]" in capsys.readouterr().err
    assert not (tmp_path / "out" / "results.parquet").exists()


def test_wildcards_and_links_edit_the_raw_document(rig_folder):
    spec = _spec(rig_folder, """
        [[parameter]]
        name = "height"
        path = "frame.exits[*].position[2]"
        values = ["1800 mm"]
        [[parameter]]
        name = "east"
        paths = ["frame.exits[1].position[0]", "frame.exits[2].position[0]"]
        values = ["2.5 m"]
        [[parameter]]
        name = "gear"
        path = "winch.gear_ratio"
        values = [7.5]
        [[parameter]]
        name = "lines"
        path = "winch.encoder_lines"
        values = [1000]
        integer = true
        [[link]]
        paths = ["frame.exits[0].position[0]", "frame.exits[3].position[0]"]
        from = "east"
        scale = -1.0
        offset = "2 m"
        [[link]]
        path = "winch.flange_diameter"
        from = "height"
        scale = 0.01
        offset = "30 mm"
        [objectives]
        tension_margin = "max"
        """)
    (v,) = grid_variants(spec)
    doc = variant_document(spec, v.values)
    from cablekit.design import design_from_dict

    d = design_from_dict(doc)
    assert np.allclose(d.exits[:, 2], 1.8)  # "all four exit heights equal"
    assert np.allclose(d.exits[:, 0], [-0.5, 2.5, 2.5, -0.5])  # -1 * 2.5 m + 2 m on the west side
    assert d.winches[0].flange_diameter == pytest.approx(0.01 * 1.8 + 0.030, rel=1e-12)
    assert d.winches[0].gear_ratio == 7.5  # the base writes 8: a whole number there is no rule
    assert doc["winch"]["encoder_lines"] == 1000 and isinstance(doc["winch"]["encoder_lines"], int)
    assert spec.base["frame"]["exits"][0]["position"] == "0, 0, 1.5 m"  # the base is untouched


def test_an_invalid_variant_is_recorded_with_its_reason_and_the_sweep_goes_on(rig_folder, tmp_path):
    spec = _spec(rig_folder, """
        [[parameter]]
        name = "gear"
        path = "winch.gear_ratio"
        values = [-2, 1]
        [objectives]
        tension_margin = "max"
        """)
    res = run_sweep(spec, tmp_path / "out", serial=True)
    t = res.table.set_index("param:gear")
    assert not t.loc[-2.0, "valid"] and "winch.gear_ratio" in t.loc[-2.0, "reason"]
    assert np.isnan(t.loc[-2.0, "tension_margin"]) and t.loc[-2.0, "rank"] == -1
    assert t.loc[1.0, "valid"] and t.loc[1.0, "pareto"]


def test_a_choice_sets_several_fields_at_once(rig_folder, tmp_path):
    spec = _spec(rig_folder, """
        [[parameter]]
        name = "rope"
        [parameter.choices.thin]
        "cable.diameter" = "2 mm"
        "cable.breaking_force" = "2 kN"
        "home.position" = "1, 1, 0.5 m"
        [parameter.choices.thick]
        "cable.diameter" = "3 mm"
        "cable.breaking_force" = "5000 N"
        "home.position" = "1, 1, 0.6 m"
        [[parameter]]
        name = "grooved"
        path = "winch.grooved"
        values = [true, false]
        [objectives]
        rope_design_factor = "max"
        """)
    t = run_sweep(spec, tmp_path / "out", serial=True).table.set_index(["param:rope", "param:grooved"])
    assert t["valid"].all() and len(t) == 4
    # the same highest tension on both ropes (t_max does not bind at this point), so the design
    # factors are in the ratio of the breaking forces, 5 kN / 2 kN
    ratio = t.loc[("thick", True), "rope_design_factor"] / t.loc[("thin", True), "rope_design_factor"]
    assert ratio == pytest.approx(2.5, rel=1e-12)
    with pytest.raises(SweepError, match="no field 'diametre'"):
        _spec(rig_folder, '[[parameter]]\nname = "rope"\n[parameter.choices.a]\n"cable.diametre" = "2 mm"\n'
                          '[objectives]\ncoverage = "max"\n', name="bad.toml")


# --------------------------------------------------------------------------------------
# optima known by hand
# --------------------------------------------------------------------------------------
def test_grid_finds_the_frame_height_of_largest_tension_margin(rig_folder, tmp_path):
    spec = _spec(rig_folder, HEIGHT_GRID)
    res = run_sweep(spec, tmp_path / "out", serial=True)
    t = res.table
    h = t["param:height"].to_numpy() - 0.5
    T = _hand_tension(h)
    # every held variant's margin is the closed form min(T - t_min, t_max - T) less the tension
    # accuracy (rounding only); where the static margin is negative the pose fails either way
    static = np.minimum(T - T_MIN, T_MAX - T)
    held = static >= T_ACCURACY
    assert held.sum() > 50 and (~held).sum() > 5
    assert np.allclose(t["tension_margin"][held], static[held] - T_ACCURACY, rtol=0, atol=1e-9)
    assert (t["tension_margin"][static < 0] < 0).all()
    best, rule = choose_best(t, res.meta)
    assert abs(best["param:height"] - _hand_optimum_height()) <= 0.010 + 1e-12  # half the 20 mm grid step
    assert "largest tension_margin" in rule


def test_constraints_keep_exactly_the_heights_the_closed_form_allows(rig_folder, tmp_path):
    spec = _spec(rig_folder, HEIGHT_GRID + '[constraints]\ntension_margin = ">= 3 N"\n')
    t = run_sweep(spec, tmp_path / "out", serial=True).table
    T = _hand_tension(t["param:height"].to_numpy() - 0.5)
    allowed = np.minimum(T - T_MIN, T_MAX - T) - T_ACCURACY >= 3.0  # 9 N <= T <= 11 N (formula above)
    assert 0 < allowed.sum() < len(t) - 10  # some heights pass, most fail
    assert np.array_equal(t["meets_constraints"].to_numpy(), allowed)
    assert set(t.loc[t["pareto"], "variant"]) <= set(t.loc[allowed, "variant"])


def test_nsga2_finds_the_same_optimum_over_a_continuous_height(rig_folder, tmp_path):
    search = '[search]\nmethod = "nsga2"\npopulation = 10\ngenerations = 10\nseed = 2\n'
    (rig_folder / "n.toml").write_text(HEAD + search + HEIGHT_GRID.replace('step = "20 mm"', ""))
    spec = load_sweep(rig_folder / "n.toml")
    res = run_sweep(spec, tmp_path / "out", serial=True)
    assert len(res.table) <= 100 and res.evaluated == len(res.table)
    best, _ = choose_best(res.table, res.meta)
    assert abs(best["param:height"] - _hand_optimum_height()) < 0.01  # [m] 10 generations of 10 on one variable


def test_a_monotone_objective_peak_torque_falls_as_one_over_the_gear_ratio(rig_folder, tmp_path):
    spec = _spec(rig_folder, """
        [[parameter]]
        name = "gear"
        path = "winch.gear_ratio"
        values = [1, 2, 3, 5, 8]
        [objectives]
        peak_motor_torque = "min"
        """)
    res = run_sweep(spec, tmp_path / "out", serial=True)
    t = res.table.sort_values("param:gear")
    i = t["param:gear"].to_numpy()
    tau = t["peak_motor_torque"].to_numpy()
    # torque through a gear train: tau_motor = F r / (i eta) (Shigley's Mechanical Engineering
    # Design, 10th ed., 2015, ch. 13, gear trains); the cable force does not depend on i here
    assert np.allclose(tau * i, tau[0] * i[0], rtol=1e-12)
    best, _ = choose_best(t, res.meta)
    assert best["param:gear"] == 8 and bool(t["pareto"].sum() == 1)


# --------------------------------------------------------------------------------------
# non-dominated sorting
# --------------------------------------------------------------------------------------
def test_non_dominated_sort_on_a_hand_worked_example():
    # minimise both; worked by hand: a(1,5) b(2,3) c(4,1) are not dominated; d(3,4) is dominated by b;
    # e(4,4) by b and d; f(5,5) by everything; g(2,3) equals b (neither dominates: same front)
    F = np.array([[1, 5], [2, 3], [4, 1], [3, 4], [4, 4], [5, 5], [2, 3]], float)
    fronts = [sorted(f.tolist()) for f in non_dominated_sort(F)]
    assert fronts == [[0, 1, 2, 6], [3], [4], [5]]


def test_non_dominated_sort_matches_pymoo_on_random_sets():
    from pymoo.util.nds.non_dominated_sorting import NonDominatedSorting  # reference: pymoo (Blank and Deb 2020)

    rng = np.random.default_rng(7)
    for k in (2, 3):
        F = np.round(rng.random((120, k)) * 10) / 10  # ties included
        ours = [sorted(f.tolist()) for f in non_dominated_sort(F)]
        ref = [sorted(f.tolist()) for f in NonDominatedSorting().do(F)]
        assert ours == ref


# --------------------------------------------------------------------------------------
# resuming
# --------------------------------------------------------------------------------------
def test_an_interrupted_sweep_continues_without_recomputing_and_gives_the_same_table(rig_folder, tmp_path):
    spec = _spec(rig_folder, HEIGHT_GRID.replace('step = "20 mm"', "steps = 12"))
    whole = run_sweep(spec, tmp_path / "whole", serial=True, chunk=4)

    class Stop(KeyboardInterrupt):
        pass

    def stop_after_two_chunks(done, total):
        if done >= 8:
            raise Stop

    with pytest.raises(Stop):
        run_sweep(spec, tmp_path / "cut", serial=True, chunk=4, progress=stop_after_two_chunks)
    assert len(list((tmp_path / "cut" / "parts").glob("part-*.parquet"))) == 2
    again = run_sweep(spec, tmp_path / "cut", serial=True, chunk=4)
    assert (again.reused, again.evaluated) == (8, 4)
    assert again.table.equals(whole.table)
    third = run_sweep(spec, tmp_path / "cut", serial=True, chunk=4)
    assert (third.reused, third.evaluated) == (12, 0) and third.table.equals(whole.table)
    # a damaged part file is not trusted: its variants are computed again
    part = sorted((tmp_path / "cut" / "parts").glob("part-*.parquet"))[0]
    part.write_bytes(part.read_bytes()[:50])
    fourth = run_sweep(spec, tmp_path / "cut", serial=True, chunk=4)
    assert fourth.evaluated == 4 and fourth.table.equals(whole.table)
    assert fourth.damaged == (part.name + ": ArrowInvalid",) and "could not be read" in "\n".join(fourth.summary())


def test_a_folder_of_another_sweep_is_refused_unless_fresh(rig_folder, tmp_path):
    a = _spec(rig_folder, HEIGHT_GRID.replace('step = "20 mm"', "steps = 3"), name="a.toml")
    b = _spec(rig_folder, HEIGHT_GRID.replace('step = "20 mm"', "steps = 4"), name="b.toml")
    run_sweep(a, tmp_path / "out", serial=True)
    with pytest.raises(SweepError, match="another sweep"):
        run_sweep(b, tmp_path / "out", serial=True)
    res = run_sweep(b, tmp_path / "out", serial=True, fresh=True)
    assert len(res.table) == 4 and res.reused == 0


# --------------------------------------------------------------------------------------
# Dask
# --------------------------------------------------------------------------------------
@pytest.mark.slow
def test_a_real_two_worker_dask_cluster_gives_the_serial_table(rig_folder, tmp_path):
    from distributed import LocalCluster

    spec = _spec(rig_folder, HEIGHT_AND_GEAR.format(steps=9) + '[constraints]\ntension_margin = ">= 0 N"\n')
    serial = run_sweep(spec, tmp_path / "serial", serial=True)
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                      dashboard_address=None) as cluster:
        assert cluster.scheduler_address.startswith("tcp://127.0.0.1:")
        dask = run_sweep(spec, tmp_path / "dask", scheduler=cluster.scheduler_address, chunk=3)
    assert dask.evaluated == len(serial.table) == 27
    assert dask.table.equals(serial.table)  # identical, bit for bit
    assert int((~dask.table["valid"]).sum()) == 9  # the gear ratio -1 rows, recorded, not crashed


@pytest.mark.slow
def test_a_dask_run_stopped_midway_keeps_its_chunks_and_continues(rig_folder, tmp_path):
    from distributed import LocalCluster

    spec = _spec(rig_folder, HEIGHT_AND_GEAR.format(steps=6))
    serial = run_sweep(spec, tmp_path / "serial", serial=True)

    def stop(done, total):
        if done >= 6:
            raise KeyboardInterrupt

    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                      dashboard_address=None) as cluster:
        with pytest.raises(KeyboardInterrupt):
            run_sweep(spec, tmp_path / "dask", scheduler=cluster.scheduler_address, chunk=3, progress=stop)
        kept = len(list((tmp_path / "dask" / "parts").glob("part-*.parquet")))
        assert kept >= 2  # every chunk finished before the stop is on disk
        again = run_sweep(spec, tmp_path / "dask", scheduler=cluster.scheduler_address, chunk=3)
    assert again.reused == 3 * kept and again.evaluated == 18 - 3 * kept
    assert again.table.equals(serial.table)


@pytest.mark.slow
def test_the_command_on_a_local_cluster_gives_the_serial_table(rig_folder, tmp_path, capsys):
    (rig_folder / "c.toml").write_text(HEAD + HEIGHT_AND_GEAR.format(steps=3))
    serial = run_sweep(load_sweep(rig_folder / "c.toml"), tmp_path / "serial", serial=True)
    assert main(["sweep", str(rig_folder / "c.toml"), "-o", str(tmp_path / "dask"), "--workers", "2"]) == 0
    out = capsys.readouterr()
    assert "9 variants: 6 valid" in out.out and "100 % 9/9 variants" in out.err  # the summary and the progress bar
    table, meta = load_results(tmp_path / "dask")
    assert table.equals(serial.table) and meta["sweep_hash"] == serial.meta["sweep_hash"]


# --------------------------------------------------------------------------------------
# the demo sweeps, best, the design file and the review sheet
# --------------------------------------------------------------------------------------
def test_the_example_in_the_module_notes_is_a_working_sweep_file():
    import cablekit.sweep as sweep

    doc = sweep.__doc__
    block = doc[doc.index('format = "cablekit-sweep/1"'):doc.index("Paths use the design")]
    text = "\n".join(line.removeprefix("    ") for line in block.splitlines())
    spec = loads_sweep(text, folder=EXAMPLES / "sweeps")
    assert spec.size == 5 * 3 * 2 and spec.parameters[2].kind == "choice"
    assert spec.constraints[0].limit == 2.0 and spec.objectives == {"peak_motor_torque": "min", "coverage": "max"}


def test_demo_sweeps_parse():
    grid = load_sweep(EXAMPLES / "sweeps" / "workshop_camera_sweep.toml")
    assert grid.size == 1000 and grid.method == "grid"
    pareto = load_sweep(EXAMPLES / "sweeps" / "workshop_camera_pareto.toml")
    assert pareto.method == "nsga2" and [p.name for p in pareto.parameters if p.continuous] == ["exit_height", "east_x"]


@pytest.mark.slow
def test_nsga2_returns_a_pareto_set_each_written_as_a_reviewable_design(rig_folder, tmp_path):
    from cablekit.review import build_review

    (rig_folder / "p.toml").write_text(HEAD + """
[search]
method = "nsga2"
population = 8
generations = 3
seed = 4
[[parameter]]
name = "height"
path = "frame.exits[*].position[2]"
range = ["1.2 m", "1.6 m"]
[objectives]
tension_margin = "max"
rope_length = "min"
[constraints]
tension_margin = ">= 0 N"
""")
    assert main(["sweep", str(rig_folder / "p.toml"), "-o", str(tmp_path / "res"), "--serial", "--quiet"]) == 0
    table, meta = load_results(tmp_path / "res")
    front = table[table["pareto"]]
    assert len(front) >= 2 and front["meets_constraints"].all() and (front["tension_margin"] >= 0).all()
    # below the best height (1.597 m) a higher frame gives more margin and needs more rope: a trade-off
    F = front[list(meta["objectives"])].to_numpy(float) * [-1.0, 1.0]  # margin is maximised
    assert len(non_dominated_sort(F)) == 1  # no member of the front dominates another
    (tmp_path / "front").mkdir()
    assert main(["best", str(tmp_path / "res"), "--write-front", str(tmp_path / "front")]) == 0
    for _, row in front.iterrows():
        d = load_design(tmp_path / "front" / f"variant-{int(row['variant'])}.toml")
        assert d.sections["sweep"].variant == int(row["variant"])
    assert main(["best", str(tmp_path / "res"), "--write", str(tmp_path / "best.toml")]) == 0
    best = load_design(tmp_path / "best.toml")
    prov = best.sections["sweep"]
    assert prov.pareto_size == len(front) and "largest tension_margin" in prov.chosen_by
    html = build_review(best, date="2026-01-01").html
    assert '<section id="chosen">' in html and "How this design was chosen" in html and prov.file_hash in html


def test_best_writes_the_chosen_design_and_its_sheet_says_how_it_was_chosen(rig_folder, tmp_path, capsys):
    from cablekit.review import build_review

    (rig_folder / "g.toml").write_text(HEAD + HEIGHT_GRID.replace('step = "20 mm"', "steps = 6"))
    assert main(["sweep", str(rig_folder / "g.toml"), "-o", str(tmp_path / "res"), "--serial", "--quiet"]) == 0
    assert main(["best", str(tmp_path / "res"), "--write", str(tmp_path / "best.toml")]) == 0
    assert "on the Pareto front" in capsys.readouterr().out
    best = load_design(tmp_path / "best.toml")
    table, _ = load_results(tmp_path / "res")
    top = table.loc[table["tension_margin"].idxmax()]
    assert best.sections["sweep"].variant == int(top["variant"])
    assert np.allclose(best.exits[:, 2], top["param:height"])
    html = build_review(best, date="2026-01-01").html
    assert '<section id="chosen">' in html and "largest tension_margin" in html
    plain = build_review(load_design(rig_folder / "rig.toml"), date="2026-01-01").html
    assert '<section id="chosen">' not in plain  # only a design chosen by a sweep gets the section


def test_best_without_results_or_with_a_bad_metric_exits_3(rig_folder, tmp_path, capsys):
    assert main(["best", str(tmp_path / "nothing")]) == 3
    assert "no results.parquet" in capsys.readouterr().err
    spec = _spec(rig_folder, HEIGHT_GRID.replace('step = "20 mm"', "steps = 3"))
    run_sweep(spec, tmp_path / "out", serial=True)
    assert main(["best", str(tmp_path / "out"), "--by", "colour"]) == 3
    assert "--by" in capsys.readouterr().err


def test_a_sweep_section_with_a_wrong_field_is_a_design_error(tmp_path):
    from cablekit.design import DesignError

    bad = tmp_path / "d.toml"
    bad.write_text(RIG + '\n[sweep]\nfile = "x"\nvariant = "seven"\n')
    with pytest.raises(DesignError) as err:
        load_design(bad)
    assert "sweep.variant" in str(err.value) and "sweep.file_hash" in str(err.value)


# --------------------------------------------------------------------------------------
# the widget, without a browser
# --------------------------------------------------------------------------------------
def test_sweep_explorer_plots_the_front_and_loads_a_clicked_design(rig_folder, tmp_path):
    from plotly.callbacks import Points

    from cablekit.widgets import DesignState
    from cablekit.widgets.sweep_explorer import SweepExplorer

    spec = _spec(rig_folder, HEIGHT_AND_GEAR.format(steps=5))
    res = run_sweep(spec, tmp_path / "res", serial=True, sweep_text=(rig_folder / "s.toml").read_text())
    state = DesignState(rig_folder / "rig.toml")
    panel = SweepExplorer(state, results=tmp_path / "res")
    t = res.table
    assert (panel.x.value, panel.y.value) == ("tension_margin", "peak_motor_torque")
    front = next(tr for tr in panel.front.data if tr.name == "Pareto front")
    assert sorted(front.customdata) == sorted(t.loc[t["pareto"], "variant"])
    by_variant = t.set_index("variant")
    assert np.allclose(front.x, by_variant.loc[list(front.customdata), "tension_margin"])
    front_rows = t[t["pareto"]]
    by_freq, rule = choose_best(t, res.meta, by="lowest_frequency")  # not an objective: larger is better
    assert by_freq["lowest_frequency"] == front_rows["lowest_frequency"].max() and "largest" in rule
    panel.x.value = "lowest_frequency"  # set a control, read the figure
    front = next(tr for tr in panel.front.data if tr.name == "Pareto front")
    assert np.allclose(front.x, by_variant.loc[list(front.customdata), "lowest_frequency"])
    (par,) = panel.parallel.data
    assert [d.label for d in par.dimensions][:2] == ["height [m]", "gear"] and len(par.dimensions[0].values) == 10
    # click the first Pareto point: it is selected and goes to the shared design
    k = 0
    v = int(front.customdata[k])
    front._dispatch_on_click(Points(point_inds=[k], xs=[front.x[k]], ys=[front.y[k]], trace_name=front.name,
                                    trace_index=2), None)
    assert panel.selected == v and not panel.to_editor.disabled and "on the Pareto front" in panel.detail.value
    assert panel.send_to_editor()
    assert np.allclose(state.design.exits[:, 2], by_variant.loc[v, "param:height"])
    assert state.design.winches[0].gear_ratio == by_variant.loc[v, "param:gear"]
    # an invalid variant can be looked at but not loaded
    bad = int(t.loc[~t["valid"], "variant"].iloc[0])
    assert panel.select(bad) and panel.to_editor.disabled and "invalid" in panel.detail.value
    assert not SweepExplorer(state, results=tmp_path / "nothing").load()


def test_sweep_explorer_runs_a_sweep_file_into_a_folder_of_its_hash(rig_folder, tmp_path):
    from cablekit.widgets import DesignState
    from cablekit.widgets.sweep_explorer import SweepExplorer, default_results_folder

    path = rig_folder / "e.toml"
    path.write_text(HEAD + HEIGHT_GRID.replace('step = "20 mm"', "steps = 3"))
    first = default_results_folder(path)
    path.write_text(HEAD + HEIGHT_GRID.replace('step = "20 mm"', "steps = 4"))
    assert default_results_folder(path) != first  # an edited sweep never shows the old results
    panel = SweepExplorer(DesignState(rig_folder / "rig.toml"), sweep=path, results=tmp_path / "r", run=True)
    assert len(panel.table) == 4 and (tmp_path / "r" / "results.parquet").exists()
    assert "4 variants" in panel.summary.value
    panel.sweep_file.value = str(rig_folder / "missing.toml")
    assert not panel.run() and "missing" in panel.message.value
