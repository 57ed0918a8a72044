"""Widgets without a browser: set a control's value, check the figures and result objects.

Every panel is driven the way a user drives it (``widget.value = ...``); with no event loop
running, the debounced refresh runs at once, so the checks follow immediately.
"""

from __future__ import annotations

import asyncio
from datetime import datetime, timezone
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from cablekit.design import content_hash, dumps_design, load_design
from cablekit.widgets import Dashboard, DesignState, choose_design, demo_designs
from cablekit.widgets import edits
from cablekit.widgets.equations import EquationsView
from cablekit.widgets.figure import PlotFigure, show_figure
from cablekit.widgets.files import SaveLoadPanel, resolve_in_folder
from cablekit.widgets.layout import LayoutEditor
from cablekit.widgets.rig import RigView
from cablekit.widgets.state import Debouncer, EditError
from cablekit.widgets.workspace_map import WorkspaceMap

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"
G0 = 9.80665  # standard gravity [m/s^2] (ISO 80000-3)


def _trace_array(trace, name):
    return np.asarray([np.nan if v is None else v for v in getattr(trace, name)], float)


@pytest.fixture()
def state():
    return DesignState(EXAMPLES / "greenhouse_tray_3cable.toml")


@pytest.fixture()
def explore(state, tmp_path):
    return Dashboard(state, panels=["rig", "workspace", "drive", "files"], folder=tmp_path)


# --------------------------------------------------------------------------------------
# design edits (plain functions)
# --------------------------------------------------------------------------------------
def test_frame_extent_scales_about_the_footprint_centre_and_from_the_floor(greenhouse):
    w, d, h = edits.frame_extent(greenhouse)
    assert (w, d, h) == pytest.approx((3.0, 2.6, 2.4))
    wider = edits.with_frame_extent(greenhouse, width=4.5, height=3.0)
    a0, a1 = greenhouse.exits, wider.exits
    assert edits.frame_extent(wider) == pytest.approx((4.5, 2.6, 3.0))
    assert np.allclose(a1[:, 0] - 1.5, (a0[:, 0] - 1.5) * 1.5)  # about the centre x = 1.5 m
    assert np.allclose(a1[:, 1], a0[:, 1])
    assert np.allclose(a1[:, 2], a0[:, 2] * 3.0 / 2.4)  # from the floor z = 0
    with pytest.raises(EditError, match="positive length"):
        edits.with_frame_extent(greenhouse, width=-1.0)


def test_polygon_layouts_fill_the_footprint():
    three = edits.polygon_layout(3, (0, 0), (3, 2))
    assert np.allclose(sorted(map(tuple, three)), [(0, 0), (1.5, 2), (3, 0)])
    four = edits.polygon_layout(4, (0, 0), (4, 3))
    assert np.allclose(sorted(map(tuple, four)), [(0, 0), (0, 3), (4, 0), (4, 3)])
    six = edits.polygon_layout(6, (0, 0), (2, 2))
    assert six.min(axis=0) == pytest.approx((0, 0)) and six.max(axis=0) == pytest.approx((2, 2))
    with pytest.raises(EditError):
        edits.polygon_layout(2, (0, 0), (1, 1))


def test_winch_count_relays_a_point_rig_and_refuses_a_rigid_one(greenhouse, sander8):
    five = edits.with_winch_count(greenhouse, 5)
    assert five.m == 5 and len(five.winches) == 5 and len(five.platform.attachments) == 5
    assert [e.name for e in five.frame.exits][:3] == greenhouse.cable_names
    assert np.allclose(five.exits[:, 2], 2.4)
    with pytest.raises(EditError, match="rigid"):
        edits.with_winch_count(sander8, 6)


# --------------------------------------------------------------------------------------
# the shared state
# --------------------------------------------------------------------------------------
def test_state_accepts_valid_edits_and_keeps_the_last_valid_design(state):
    seen = []
    state.observe(lambda c: seen.append(c.new), "design")
    first = state.design
    assert state.propose(lambda d: edits.with_masses(d, payload=0.8), what="payload")
    assert state.design.payload.mass == 0.8 and state.revision == 1 and len(seen) == 1
    assert not state.propose(lambda d: edits.with_masses(d, payload=-1.0), what="payload mass")
    assert state.design.payload.mass == 0.8 and len(seen) == 1
    assert any("payload.mass" in p for p in state.problems)
    assert "not applied" in state.status
    assert state.propose(lambda d: edits.with_masses(d, payload=first.payload.mass))
    assert state.problems == []


def test_state_cache_is_per_design(state):
    calls = []
    value = state.cached("x", lambda d: calls.append(d) or d.payload.mass)
    assert state.cached("x", lambda d: calls.append(d)) == value and len(calls) == 1
    state.propose(lambda d: edits.with_masses(d, payload=0.9))
    assert state.cached("x", lambda d: calls.append(d) or d.payload.mass) == 0.9 and len(calls) == 2


def test_debouncer_runs_once_after_a_burst_inside_an_event_loop():
    calls = []
    deb = Debouncer(lambda: calls.append(1), delay=0.05)

    async def burst():
        for _ in range(5):
            deb()
        assert deb.pending and calls == []
        await asyncio.sleep(0.2)

    asyncio.run(burst())
    assert calls == [1]
    deb()  # no running loop: at once
    assert calls == [1, 1]


# --------------------------------------------------------------------------------------
# layout editor -> rig view, workspace map, drivetrain
# --------------------------------------------------------------------------------------
def test_width_slider_updates_every_panel(explore):
    editor, rig, ws, drive = explore.editor, explore.panels["rig"], explore.panels["workspace"], explore.panels["drive"]
    x0 = _trace_array(rig.fig.data[1], "x")
    ws0, drive0 = ws.result, drive.result
    z0 = np.array(ws.slice_fig.data[0].z, float)
    editor.width.value = 3.6
    d = explore.state.design
    assert edits.frame_extent(d)[0] == pytest.approx(3.6)
    assert np.allclose(_trace_array(rig.fig.data[1], "x"), d.exits[:, 0])
    assert not np.allclose(_trace_array(rig.fig.data[1], "x"), x0)
    assert ws.result is not ws0 and ws.result.result.exits[0, 0] == pytest.approx(d.exits[0, 0])
    z1 = np.array(ws.slice_fig.data[0].z, float)
    assert not np.array_equal(np.nan_to_num(z0), np.nan_to_num(z1))
    assert drive.result is not drive0
    assert drive.result.rows[0].max_tension != drive0.rows[0].max_tension


def test_invalid_value_shows_the_message_and_keeps_the_last_results(explore):
    editor, ws, rig = explore.editor, explore.panels["workspace"], explore.panels["rig"]
    before_design, before_ws, before_rig = explore.state.design, ws.result, rig.result
    z_before = np.array(ws.slice_fig.data[0].z, float)
    editor.height.value = 0.5  # below the task box top (1.4 m): the design would be invalid
    assert explore.state.design is before_design
    assert ws.result is before_ws and rig.result is before_rig
    assert np.array_equal(np.nan_to_num(np.array(ws.slice_fig.data[0].z, float)), np.nan_to_num(z_before))
    assert "task.box_upper" in editor.banner.value and "not applied" in editor.banner.value
    assert editor.height.value == 0.5  # the typed value stays visible next to its message
    editor.payload_mass.value = -2.0
    assert "payload.mass" in editor.banner.value and explore.state.design is before_design
    editor.payload_mass.value = 0.7  # a good value clears the message and applies
    assert explore.state.problems == [] and explore.state.design.payload.mass == 0.7
    assert editor.height.value == pytest.approx(2.4)  # every control shows the valid design again


def test_exit_point_box_and_winch_count_edit_the_rig(explore):
    editor, rig, drive = explore.editor, explore.panels["rig"], explore.panels["drive"]
    row = editor.exit_rows.children[2]
    row.children[2].value = 2.2  # post C, y [m]
    assert explore.state.design.exits[2, 1] == pytest.approx(2.2)
    assert _trace_array(rig.fig.data[1], "y")[2] == pytest.approx(2.2)
    editor.winch_count.value = 4
    assert explore.state.design.m == 4
    assert len(editor.exit_rows.children) == 4 and len(rig.fig.data[1].x) == 4
    assert len(drive.result.rows) == 4


def test_platform_size_and_catalogue_rope(tmp_path):
    from cablekit.cables import rope_catalogue

    state = DesignState(EXAMPLES / "hall_sander_8cable.toml")
    editor = LayoutEditor(state)
    size = edits.platform_size(state.design)
    editor.platform_size[0].value = 2 * size[0]
    original = load_design(EXAMPLES / "hall_sander_8cable.toml")
    b0, b1 = original.attachments, state.design.attachments
    assert np.allclose(b1[:, 0], 2 * b0[:, 0]) and np.allclose(b1[:, 1:], b0[:, 1:])
    assert state.design.platform.body_half_size[0] == pytest.approx(2 * original.platform.body_half_size[0])
    ropes = rope_catalogue()
    k = max(range(len(ropes)), key=lambda i: ropes[i].breaking_force)
    editor.rope_choice.value = k
    assert state.design.cable.diameter == ropes[k].diameter
    assert state.design.cable.breaking_force == ropes[k].breaking_force
    assert editor.rope_diameter.value == pytest.approx(ropes[k].diameter * 1e3)
    editor.rope_mbf.value = 20.0  # edited by hand: no longer the catalogue entry
    assert editor.rope_choice.value == -1
    point = LayoutEditor(DesignState(EXAMPLES / "greenhouse_tray_3cable.toml"))
    assert all(b.disabled for b in point.platform_size)


def test_rig_view_tensions_balance_gravity(state):
    """Concurrent forces in equilibrium: sum of t_i u_i + m g = 0 (Meriam and Kraige,
    *Engineering Mechanics: Statics*, 7th ed., 2012, sec. 3/4), checked with unit vectors
    computed here from the drawn cable end points, independently of cablekit's kinematics."""
    rig = RigView(state)
    rig.sliders[0].value = 1.2
    rig.sliders[1].value = 0.7
    snap = rig.result
    assert snap.pose[:2] == pytest.approx((1.2, 0.7))
    cab = np.column_stack([_trace_array(rig.fig.data[2], k) for k in "xyz"]).reshape(-1, 3, 3)[:, :2]
    u = cab[:, 0] - cab[:, 1]
    u /= np.linalg.norm(u, axis=1)[:, None]
    t = snap.tensions.tensions[0]
    weight = np.array([0.0, 0.0, -state.design.total_mass * G0])
    assert np.allclose(t @ u + weight, 0.0, atol=1e-9 * state.design.total_mass * G0)
    assert [float(c) for c in rig.fig.data[2].line.color[::3]] == pytest.approx(list(t))


def test_workspace_map_shows_the_result_numbers(explore):
    ws = explore.panels["workspace"]
    explore.editor.width.value = 2.2  # a narrow frame: part of the task box loses a taut cable
    data = ws.result
    assert 0 < data.feasible.mean() < 1
    res = data.result
    k = ws.slice_z.value
    nx, ny, nz = (len(a) for a in res.axes)
    margin = res.position_margin[res.from_box].reshape(nx, ny, nz)[:, :, k].T
    assert np.allclose(np.array(ws.slice_fig.data[0].z, float), margin, equal_nan=True)
    share = f"{100 * np.mean(res.position_feasible[res.from_box]):.1f} %"
    assert share in ws.summary.value
    ws.quantity.value = "reason"
    assert ws.slice_fig.data[0].colorbar.title.text == "reason"
    assert set(np.unique(np.array(ws.slice_fig.data[0].z, float))) <= set(range(len(data.reasons)))
    ws.quantity.value = "margin"
    ws.view.value = "3d"
    assert len(ws.cloud_fig.data[0].x) == int(np.sum(res.position_feasible[res.from_box]))
    ws.slice_z.value = 0
    ws.view.value = "slice"
    assert "z = " + f"{res.axes[2][0]:.2f}" in ws.slice_fig.layout.title.text
    ws.quantity.value = "reason"
    ws.view.value = "3d"  # the reasons are shown at every position, not only the feasible ones
    assert len(ws.cloud_fig.data[0].x) == nx * ny * nz
    ws.step.value = -5.0  # a bad grid step: message, last map kept
    assert ws.result is data and "grid step" in ws.status.value
    ws.step.value = 2.0  # too fine for an interactive map: message, last map kept
    assert ws.result is data and "coarser step" in ws.status.value


def test_drivetrain_panel_follows_a_weaker_motor(explore):
    drive = explore.panels["drive"]
    assert len(drive.result.rows) == 3
    explore.editor.rated_torque.value = 0.02  # N*m: far too weak for the greenhouse tray
    rated = [c for c in drive.result.checks if c.key == "motor_torque_rated"]
    assert rated and all(c.status == "fail" for c in rated)
    assert "fail" in drive.table.value
    assert len(drive.fig.data) == 3  # one bar trace per winch, from DriveResult.figure()


# --------------------------------------------------------------------------------------
# files
# --------------------------------------------------------------------------------------
def test_save_and_load_round_trip(state, tmp_path):
    panel = SaveLoadPanel(state, folder=tmp_path)
    state.propose(lambda d: edits.with_masses(d, payload=0.65))
    panel.name.value = "mine.toml"
    assert panel.save()
    saved = load_design(tmp_path / "mine.toml")
    assert content_hash(saved) == content_hash(state.design)
    assert "saved to" in panel.message.value
    state.propose(lambda d: edits.with_masses(d, payload=0.9))
    assert panel.load() and state.design.payload.mass == 0.65
    assert panel.text.value == dumps_design(state.design)


def test_save_refuses_names_outside_the_folder_and_bad_files_keep_the_design(state, tmp_path):
    panel = SaveLoadPanel(state, folder=tmp_path)
    for name in ("../escape.toml", "/etc/x.toml", "notes.txt", ""):
        panel.name.value = name
        assert not panel.save()
    assert list(tmp_path.iterdir()) == []
    with pytest.raises(ValueError):
        resolve_in_folder(tmp_path, "sub/../../x.toml")
    (tmp_path / "broken.toml").write_text('format = "cablekit-design/1"\n[meta]\nname = 3\n')
    before = state.design
    panel.name.value = "broken.toml"
    assert not panel.load()
    assert state.design is before and "meta.name" in panel.message.value
    content = (EXAMPLES / "workshop_camera_4cable.toml").read_bytes()
    panel.upload.value = ({"name": "up.toml", "type": "application/toml", "size": len(content),
                           "last_modified": datetime(2024, 1, 1, tzinfo=timezone.utc), "content": memoryview(content)},)
    assert state.design.m == 4 and "loaded up.toml" in panel.message.value


# --------------------------------------------------------------------------------------
# other panels
# --------------------------------------------------------------------------------------
def test_error_map_by_source_and_metric(state):
    from cablekit.accuracy import SOURCES, error_budget
    from cablekit.widgets.error_map import ErrorMap, single_source_budget

    em = ErrorMap(state)
    p95_all = np.array(em.map_fig.data[0].marker.color, float)
    assert len(p95_all) > 0 and "all sources" in em.map_fig.layout.title.text
    em.metric.value = "worst"
    worst_all = np.array(em.map_fig.data[0].marker.color, float)
    assert np.all(worst_all >= p95_all - 1e-9)  # an interval bound is never below the 95th percentile
    em.source.value = "home_length"
    one = np.array(em.map_fig.data[0].marker.color, float)
    assert np.all(one <= worst_all + 1e-9) and "home length" in em.map_fig.layout.title.text
    assert sum(em.share_fig.data[0].x) == pytest.approx(100.0)
    # every source of the library can be shown alone: its one-source budget leaves only that
    # source's share of the mean-square error (EA errors act through the stretch, kept on)
    from cablekit.accuracy import accuracy_map

    budget = error_budget(state.design)
    keys = [s.key for s in SOURCES]
    poses = np.array([state.design.home_pose])
    for s in SOURCES:
        r = accuracy_map(state.design, poses=poses, budget=single_source_budget(budget, s.key), builds=20,
                         monte_carlo_samples=0)
        allowed = {s.key, "stretch"} if s.key == "axial_stiffness" else {s.key}
        others = [j for j, key in enumerate(keys) if key not in allowed]
        assert np.all(r.source_ms[:, others] == 0.0), s.key
    with pytest.raises(ValueError):
        single_source_budget(budget, "no such source")


def test_arm_view_pivots_about_the_tip(state):
    from cablekit.widgets.arm_view import ArmReachView

    view = ArmReachView(state)
    first = view.result.pivot.platform_poses[0].copy()
    assert np.max(view.result.sweep.tip_error) < 1e-9
    view.roll.value = 90.0
    second = view.result.pivot.platform_poses[0]
    assert not np.allclose(first, second)
    tip = np.array([view.pivot_fig.data[3].x[0], view.pivot_fig.data[3].y[0], view.pivot_fig.data[3].z[0]])
    assert np.allclose(tip, view.result.pivot.achieved[0], atol=1e-9)
    assert "weakest servo" in view.summary.value
    # the real tilt of the point platform at the pivot pose (cablekit.suspended), levelled arm
    assert view.result.real is not None and "real platform tilt at this pose" in view.summary.value
    no_arm = ArmReachView(DesignState(EXAMPLES / "workshop_camera_4cable.toml"))
    assert no_arm.result is None and "no [arm]" in no_arm.status.value


def test_review_panel_lists_checks_and_writes_the_sheet(state, tmp_path):
    from cablekit.checks import run_all
    from cablekit.widgets.review_panel import ReviewPanel

    panel = ReviewPanel(state, folder=tmp_path)
    keys = {c.key for c in panel.result}
    assert keys == {c.key for c in run_all(state.design)}
    assert "source of the limit" in panel.table.value
    panel.sheet_name.value = "sheet.html"
    assert panel.write_sheet()
    text = (tmp_path / "sheet.html").read_text(encoding="utf-8")
    assert state.design.meta.name in text and "written to" in panel.message.value
    panel.sheet_name.value = "../outside.html"
    assert not panel.write_sheet() and not (tmp_path.parent / "outside.html").exists()


def test_equations_follow_the_platform_kind(state):
    view = EquationsView(state, modules=("symbolic",))
    assert r"\mathbf{w}_i = \mathbf{u}_i" in view.math.value and "$$" in view.math.value
    state.load(EXAMPLES / "hall_sander_8cable.toml")
    assert "R_z(\\psi)" in view.math.value and "rigid platform" in view.math.value


# --------------------------------------------------------------------------------------
# figures, dashboards, notebooks' helpers
# --------------------------------------------------------------------------------------
def test_plot_figure_keeps_its_synced_state_current():
    fig = PlotFigure()
    fig.add_scatter(x=[0, 1], y=[0, 1])
    with fig.batch_update():
        fig.data[0].y = [5.0, 6.0]
        fig.layout.title.text = "updated"
    state = fig.get_state()
    assert list(fig._widget_data[0]["y"]) == [5.0, 6.0] and fig._widget_layout["title"]["text"] == "updated"
    assert "_ck_bundle" in state and len(state["_ck_bundle_hash"]) == 64
    import plotly.graph_objects as go

    from cablekit.widgets.figure import SENDERS

    assert all(callable(getattr(go.FigureWidget, name, None)) for name in SENDERS)  # plotly still has them
    fig.add_bar(x=["a"], y=[1])
    fig.data = fig.data[:1]
    assert [t["type"] for t in fig._widget_data] == ["scatter"]  # traces added and deleted: state follows
    src = go.Figure(go.Bar(x=["a", "b"], y=[1, 2]))
    show_figure(fig, src)
    assert fig.data[0].type == "bar" and list(fig.data[0].y) == [1, 2]
    first = fig.data[0]
    show_figure(fig, go.Figure(go.Bar(x=["a", "b"], y=[3, 4])))
    assert fig.data[0] is first and list(fig.data[0].y) == [3, 4]  # updated in place


def test_choose_design_from_the_address():
    demos = demo_designs()
    assert {"greenhouse_tray_3cable", "workshop_camera_4cable", "hall_sander_8cable"} <= set(demos)
    path, note = choose_design(None, query="design=hall_sander_8cable")
    assert path == demos["hall_sander_8cable"] and note == ""
    path, note = choose_design(None, query="design=../../etc/passwd")
    assert path == demos["greenhouse_tray_3cable"] and "not a bundled demo" in note
    assert choose_design("/some/file.toml", query="design=hall_sander_8cable")[0] == Path("/some/file.toml")


@pytest.mark.parametrize("name", ["greenhouse_tray_3cable", "workshop_camera_4cable", "hall_sander_8cable"])
def test_every_demo_opens_a_working_dashboard(name, tmp_path):
    dash = Dashboard(EXAMPLES / f"{name}.toml", panels=["rig", "workspace", "drive", "errors", "review"],
                     folder=tmp_path)
    for key, panel in dash.panels.items():
        assert panel.result is not None, (key, panel.status.value)
        assert "error" not in panel.status.value
    assert dash.design.meta.name in dash.header.value


def test_layout_editor_units_in_every_label(state):
    editor = LayoutEditor(state)
    labels = [w.description for w in (editor.width, editor.depth, editor.height, editor.winch_count,
                                      editor.platform_mass, editor.payload_mass, editor.rope_diameter, editor.rope_mbf,
                                      editor.rope_ea, editor.rope_tmin, editor.drum_diameter, editor.gear_ratio,
                                      editor.efficiency, editor.rated_torque, editor.peak_torque,
                                      editor.brake_torque, editor.acceleration)]
    assert all(label.endswith("]") and "[" in label for label in labels), labels


def test_layout_editor_edits_the_brake_rating_and_the_task_acceleration(state):
    # the two inputs the brake and acceleration checks judge are editable where the designer works
    editor = LayoutEditor(state)
    assert editor.brake_torque.value == pytest.approx(state.design.winches[0].brake_holding_torque)
    assert not editor.brake_torque.disabled
    editor.brake_torque.value = 0.8
    assert all(w.brake_holding_torque == pytest.approx(0.8) for w in state.design.winches)
    editor.acceleration.value = 0.2
    assert state.design.task.acceleration == pytest.approx(0.2)
    editor.acceleration.value = -1.0  # refused by name, the last valid design kept
    assert state.design.task.acceleration == pytest.approx(0.2)
    assert "acceleration" in editor.banner.value.lower()


def test_a_failing_computation_keeps_the_panel_alive(state, monkeypatch):
    ws = WorkspaceMap(state)
    good = ws.result
    import cablekit.workspace as workspace

    def boom(*a, **k):
        raise RuntimeError("simulated failure")

    monkeypatch.setattr(workspace, "compute_workspace", boom)
    state.propose(lambda d: replace(d, payload=replace(d.payload, mass=0.6)))
    assert ws.result is good
    assert "internal error RuntimeError: simulated failure" in ws.status.value
