"""The demo scenario end to end: every prototype's figures within the acceptance tolerances."""

import pytest
from click.testing import CliRunner

from beamshot import analyze
from beamshot.cli import cli
from beamshot.demo import write_demo_photos


@pytest.fixture(scope="module")
def demo_lights(tmp_path_factory):
    return write_demo_photos(str(tmp_path_factory.mktemp("demo")))


@pytest.mark.parametrize("index", [0, 1, 2])
def test_demo_matches_truth(demo_lights, index):
    light = demo_lights[index]
    rep = analyze(light["photo"], distance_m=light["distance_m"], ambient=light["ambient"],
                  lux_at_peak=light["lux_at_peak"])
    t = light["truth"]
    for key, tkey, tol in (("hotspot_angle", "hotspot_angle_deg", 0.02), ("field_angle", "field_angle_deg", 0.03),
                           ("spill_angle", "spill_angle_deg", 0.03), ("ra", "ra", 0.05), ("peak_intensity", "peak_cd", 0.03),
                           ("beam_flux", "beam_flux_lm", 0.03)):
        assert abs(rep[key].value / t[tkey] - 1) <= tol, key
    assert not any("tilted" in w for w in rep.warnings)


def test_demo_command_runs(tmp_path):
    res = CliRunner().invoke(cli, ["demo", "--out", str(tmp_path / "d")])
    assert res.exit_code == 0, res.output
    assert res.output.count("report:") == 3
    assert (tmp_path / "d" / "larkspur-tir" / "beam.png").exists()
