"""Companion tracks and per-group designs in the designer (issue 15)."""

from __future__ import annotations

import numpy as np
import pytest

from schedwidget import ScheduleDesigner, ScheduleError, cosine, flat, one_cycle, ramp, stages, warmup
from schedwidget.sample import trace
from schedwidget.tracks import inverse_momentum, per_group, tracks
from schedwidget.widget.tracks_view import with_rate


def one_cycle_tracks(n: int = 1000):
    """A one-cycle rate with its momentum companion (Smith 2018: momentum falls while the rate rises; 0.95 and
    0.85 are common practice, no source) and a constant weight decay."""
    r = one_cycle(0.1, steps=n, tail=0.1)
    return tracks(r, momentum=inverse_momentum(r), weight_decay=flat(5e-4))


class TestCompanions:
    """Companion tracks are drawn under the curve on the curve's own x scale, each with its own y axis."""

    def test_drawn_on_the_same_clock(self):
        """One figure per companion the tracks hold, sharing the curve's x scale; the line is the core's trace."""
        t = one_cycle_tracks()
        d = ScheduleDesigner(t)
        p = d.tracks_panel
        assert d.schedule == t.rate and d.tracks == t
        assert p.shown() == ("momentum", "weight_decay")
        m = p.multiples["momentum"]
        assert m.line.scales["x"] is d.canvas.xs
        assert m.ys is not d.canvas.rate_scale and m.y_axis.scale is m.ys
        tr = trace(t.momentum, d.steps)
        assert np.array_equal(m.line.x, tr.x) and np.array_equal(m.line.y, tr.y)
        assert m.ys.min <= 0.85 and m.ys.max >= 0.95
        assert np.array_equal(m.x_axis.tick_values, d.canvas.x_axis.tick_values)
        assert p.multiples["beta2"].box.layout.display == "none"

    def test_x_axis_in_epochs(self):
        """Switching the x axis to epochs moves every companion with the curve."""
        d = ScheduleDesigner(one_cycle_tracks(1000), steps_per_epoch=100)
        d.canvas.x_choice.value = "epochs"
        m = d.tracks_panel.multiples["momentum"]
        assert m.line.x[-1] == pytest.approx(d.canvas.curve.x[-1])
        assert m.line.x[-1] == pytest.approx(9.99)

    def test_follow_the_rate_length(self):
        """A new length of the rate stretches the companions with a length (same clock); constants stay."""
        d = ScheduleDesigner(one_cycle_tracks(1000))
        d.control(0, "steps").text.value = "1,500"
        assert d.error == ""
        assert d.schedule.length == 1500
        assert d.tracks.rate == d.schedule and d.tracks.momentum.length == 1500
        assert d.tracks.weight_decay == flat(5e-4)

    def test_open_ended_rate_is_said(self):
        """A rate the companions cannot follow (open-ended) keeps them, and the panel says why."""
        d = ScheduleDesigner(one_cycle_tracks(1000))
        before = d.tracks
        d.schedule = flat(0.1)
        assert d.tracks == before
        assert "open-ended" in d.tracks_panel.problem.value
        d.schedule = one_cycle(0.1, steps=1000, tail=0.1)
        assert d.tracks_problem == ""

    def test_assigned_later_and_removed(self):
        """Tracks given after the start appear under the curve; None removes them and keeps the rate."""
        d = ScheduleDesigner(cosine(0.1, steps=1000))
        assert d.tracks_panel is None
        t = one_cycle_tracks()
        d.tracks = t
        assert d.schedule == t.rate and d.tracks_panel.shown() == ("momentum", "weight_decay")
        d.tracks = None
        assert d.tracks_panel.shown() == () and d.schedule == t.rate

    def test_note(self):
        """The panel says how to edit another track."""
        d = ScheduleDesigner(one_cycle_tracks())
        assert "edit track" in d.tracks_panel.note.value

    def test_with_rate(self):
        """with_rate replaces the rate, stretches the companions and refuses an open-ended rate with a reason."""
        t = tracks(cosine(0.1, steps=100), momentum=ramp(0.85, 0.95, steps=100))
        assert with_rate(t, 0, cosine(0.1, steps=300)).momentum == ramp(0.85, 0.95, steps=100).stretch(300)
        with pytest.raises(ScheduleError, match="momentum track"):
            with_rate(t, 0, flat(0.1))

    def test_bad_tracks_value(self):
        """Something that is not tracks is refused naming the trait."""
        d = ScheduleDesigner(cosine(0.1, steps=100))
        with pytest.raises(ScheduleError, match="tracks"):
            d.tracks = "momentum"


def backbone_and_head():
    """A frozen-then-warmed backbone (rate 0 for 200 ticks, its own warmup into a cosine) and a head with tracks."""
    backbone = stages(flat(0.0, steps=200), warmup(cosine(0.01, steps=700), 100))
    return per_group({"backbone": backbone, "head": one_cycle_tracks(1000)})


class TestGroups:
    """A design per param group: the stages panel's group menu chooses which group's rate is edited."""

    def test_menu(self):
        """The menu lists the groups by name and shows only for per-group designs."""
        d = ScheduleDesigner(backbone_and_head())
        menu = d.stages.group_menu
        assert menu.options == (("backbone (group 0)", 0), ("head (group 1)", 1))
        assert menu.layout.display == "flex" and menu.value == 0
        assert d.schedule == backbone_and_head().groups[0].rate
        assert ScheduleDesigner(one_cycle_tracks()).stages.group_menu.layout.display == "none"

    def test_choose_and_edit_a_group(self):
        """Choosing the head edits its rate; the edit lands in that group only; its companions show."""
        g = backbone_and_head()
        d = ScheduleDesigner(g)
        assert d.tracks_panel.shown() == ()
        d.stages.group_menu.value = 1
        assert d.group == 1 and d.schedule == g.groups[1].rate
        assert d.tracks_panel.shown() == ("momentum", "weight_decay")
        d.control(0, "peak").text.value = 0.2
        assert d.tracks.groups[1].rate.peak == 0.2
        assert d.tracks.groups[0] == g.groups[0] and d.tracks.names == g.names
        d.stages.group_menu.value = 0
        assert d.schedule == g.groups[0].rate

    def test_group_out_of_range(self):
        """A group index the design does not have is refused naming the range."""
        d = ScheduleDesigner(backbone_and_head())
        with pytest.raises(ScheduleError, match="0 .. 1"):
            d.group = 2

    def test_fewer_groups(self):
        """New tracks with fewer groups go back to group 0."""
        d = ScheduleDesigner(backbone_and_head())
        d.group = 1
        d.tracks = one_cycle_tracks()
        assert d.group == 0 and d.schedule == one_cycle_tracks().rate

    def test_list_of_designs(self):
        """A plain list of designs is read as per_group(...)."""
        d = ScheduleDesigner(cosine(0.1, steps=100))
        d.tracks = [cosine(0.1, steps=100), flat(0.01, steps=100)]
        assert d.tracks == per_group([cosine(0.1, steps=100), flat(0.01, steps=100)])
        assert d.stages.group_menu.options == (("group 0", 0), ("group 1", 1))


class TestLogsTab:
    """The logs panel (issue 16) is the designer's Logs tab: it checks against the design, and what it adopts
    becomes the design."""

    def open(self, d):
        d.tabs.selected_index = d.tabs.titles.index("Logs")
        return d.logs

    def test_started_when_shown(self):
        """The panel starts when its tab is first shown, with the design and the traces given to the designer."""
        d = ScheduleDesigner(cosine(0.1, steps=100), traces={"run": [0.1] * 100})
        assert d.logs is None
        logs = self.open(d)
        assert d.tabs.children[d.tabs.titles.index("Logs")].children == (logs,)
        assert logs.design == d.schedule and list(logs.pick.options)[-1] == "run"

    def test_follows_the_design(self):
        """An edit in the designer is the design the logs are checked against."""
        d = ScheduleDesigner(cosine(0.1, steps=100))
        logs = self.open(d)
        d.control(0, "peak").text.value = 0.2
        assert logs.design == cosine(0.2, steps=100)

    def test_adopted_design_replaces_the_designers(self):
        """A recovered design adopted in the panel becomes the designer's design (and is edited in the stages)."""
        run = [0.1] * 50 + [0.01] * 50
        d = ScheduleDesigner(cosine(0.1, steps=100), traces={"run": run})
        logs = self.open(d)
        logs.pick.value = "run"
        logs.recover_button.click()
        logs.use_recovered.click()
        assert d.error == "" and logs.error == ""
        assert d.schedule == logs.adopted
        assert np.allclose(d.schedule(np.arange(100)), run, rtol=1e-9)
        assert d.stages.form is not None


class TestAxes:
    """Each companion's y axis has round labels inside its range; its x axis has the curve's labels."""

    def test_round_labels(self):
        """Momentum 0.85 .. 0.95 is labelled 0.85, 0.9, 0.95 (not the range's ends); the x labels are the curve's."""
        d = ScheduleDesigner(one_cycle_tracks(10_000))
        m = d.tracks_panel.multiples["momentum"]
        assert m.y_axis.tick_values.tolist() == [0.85, 0.9, 0.95]
        assert m.ys.min <= 0.85 and m.ys.max >= 0.95
        assert np.array_equal(m.x_axis.tick_values, d.canvas.x_axis.tick_values)
        assert d.tracks_panel.multiples["weight_decay"].y_axis.tick_values.tolist() == [0.00045, 0.0005, 0.00055]


class TestEditATrack:
    """The stages panel edits a companion track with the same controls, chosen in its 'edit track' menu."""

    def test_menu_lists_the_tracks(self):
        """The menu lists the tracks the group holds, in words; hidden without tracks."""
        d = ScheduleDesigner(one_cycle_tracks())
        assert d.stages.track_menu.options == (("learning rate", "rate"), ("momentum", "momentum"),
                                               ("weight decay", "weight_decay"))
        assert d.stages.track_menu.layout.display == "flex"
        assert ScheduleDesigner(cosine(0.1, steps=10)).stages.track_menu.layout.display == "none"

    def test_edit_the_momentum(self):
        """Choosing momentum puts it on the curve and in the stages; an edit lands in the momentum track only; the
        rate is drawn under the curve meanwhile; back on the rate, the rate is the design again."""
        t = one_cycle_tracks()
        d = ScheduleDesigner(t)
        d.stages.track_menu.value = "momentum"
        assert d.track == "momentum" and d.schedule == t.momentum
        assert "momentum" in d.canvas.y_title.value
        assert d.tracks_panel.shown() == ("rate", "weight_decay")
        d.control(0, "start").text.value = 0.9
        assert d.error == ""
        assert d.tracks.momentum.parts[0].start == 0.9 and d.tracks.rate == t.rate
        d.stages.track_menu.value = "rate"
        assert d.schedule == t.rate and "learning rate" in d.canvas.y_title.value
        assert d.tracks_panel.shown() == ("momentum", "weight_decay")

    def test_out_of_range_is_refused(self):
        """A momentum of 1 or more is refused with the core's message; the last valid track stays."""
        t = one_cycle_tracks()
        d = ScheduleDesigner(t)
        d.track = "momentum"
        d.control(0, "start").text.value = 1.2
        assert "momentum" in d.error and d.tracks == t and d.schedule == t.momentum

    def test_weight_decay(self):
        """A constant weight decay is edited as a constant stage."""
        d = ScheduleDesigner(one_cycle_tracks())
        d.track = "weight_decay"
        d.control(0, "lr").text.value = 1e-3
        assert d.tracks.weight_decay == flat(1e-3)

    def test_unknown_track(self):
        """A track the design does not hold is refused naming the ones it holds."""
        d = ScheduleDesigner(one_cycle_tracks())
        with pytest.raises(ScheduleError, match="'momentum', 'weight_decay'"):
            d.track = "beta2"

    def test_group_without_the_track(self):
        """Another group without the edited track goes back to its rate."""
        d = ScheduleDesigner(backbone_and_head())
        d.group = 1
        d.track = "momentum"
        d.group = 0
        assert d.track == "rate" and d.schedule == backbone_and_head().groups[0].rate


def test_save_and_autosave_write_every_track_while_a_companion_is_edited(tmp_path):
    """Save writes the whole tracks value, not the track the stages happen to edit (a momentum design was written
    as 'the design' while the momentum track was being edited); load and from_file bring the tracks back."""
    from schedwidget import cosine, flat, load_tracks, tracks, warmup
    from schedwidget.widget import ScheduleDesigner

    held = tracks(warmup(cosine(0.1, steps=900), 100), momentum=flat(0.9, steps=1000))
    d = ScheduleDesigner(held, autosave=tmp_path / "auto.json")
    d.track = "momentum"
    assert d.schedule == flat(0.9, steps=1000)
    d.save(tmp_path / "t.json")
    assert load_tracks(tmp_path / "t.json") == held
    other = ScheduleDesigner(cosine(0.1, steps=1000))
    other.load(tmp_path / "t.json")
    assert other.tracks == held and other.schedule == held.rate
    assert ScheduleDesigner.from_file(tmp_path / "t.json").tracks == held
    for w in (d, other):
        w.close()


def test_export_writes_every_track_while_a_companion_is_edited():
    """Export's Python and torch code hold every track (one function each; the snippet that sets lr and momentum),
    not the momentum design the stages happen to edit; numpy, JAX and Keras take the edited group's rate."""
    from schedwidget import cosine, flat, to_python, tracks, warmup
    from schedwidget.track_export import to_torch_tracks
    from schedwidget.widget import ScheduleDesigner
    from schedwidget.widget.codeview import code_for

    held = tracks(warmup(cosine(0.1, steps=900), 100), momentum=flat(0.9, steps=1000))
    d = ScheduleDesigner(held)
    d.track = "momentum"
    assert code_for(d, "Python") == to_python(held, name="lr_at", unit="step", steps_per_epoch=d.steps_per_epoch)
    assert code_for(d, "torch") == to_torch_tracks(held, unit="step", steps_per_epoch=d.steps_per_epoch)
    assert code_for(d, "numpy") == to_python(held.rate, name="lr_at", unit="step",
                                             steps_per_epoch=d.steps_per_epoch, array=True)
    d.close()
