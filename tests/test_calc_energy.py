"""Energy figures (render.calc.energy): annual kWh of simple schedules worked by hand."""

from __future__ import annotations

import dataclasses
import json

import pytest

from render.calc.energy import (
    DEFAULT_ANNUAL_BURNING_HOURS,
    DimmingSchedule,
    EnergyInputs,
    annual_energy,
    energy_difference,
    input_watts,
    mean_power_fraction,
)
from render.errors import InputError
from render.light.photometry import load_photometry


def test_half_night_dimmed_to_half_by_hand():
    # By hand (arithmetic): 50 W for 4000 h, 6 of 12 h at 50 % with power proportional to light:
    # 50 W × 4000 h × (6·1 + 6·0.5)/12 = 150 000 Wh = 150 kWh.
    schedule = DimmingSchedule.from_tuples([(6.0, 12.0, 0.5)], night_hours=12.0)
    result = annual_energy(EnergyInputs(input_watts_w=50.0, schedule=schedule, annual_burning_hours_h=4000.0))
    assert result.mean_power_fraction == pytest.approx(0.75, rel=1e-12)
    assert result.annual_kwh_per_luminaire == pytest.approx(150.0, rel=1e-12)


def test_switch_off_gives_zero():
    # By hand: off all night draws nothing (no standby in the stated model), even with a
    # minimum power fraction, which applies only to a luminaire that is on.
    schedule = DimmingSchedule.from_tuples([(0.0, 12.0, 0.0)], minimum_power_fraction=0.2)
    result = annual_energy(EnergyInputs(input_watts_w=80.0, n_luminaires=10, schedule=schedule, tariff_per_kwh=0.3))
    assert result.annual_kwh == 0.0
    assert result.annual_cost == 0.0


def test_part_night_switch_off_and_minimum_power_by_hand():
    # By hand: 12 h night, 4 h at 30 % with m = 0.1 -> f = 0.1 + 0.9·0.3 = 0.37; 2 h off; 6 h full.
    # mean = (4·0.37 + 2·0 + 6·1)/12 = 7.48/12.
    schedule = DimmingSchedule.from_tuples([(4.0, 8.0, 0.3), (8.0, 10.0, 0.0)], minimum_power_fraction=0.1)
    assert mean_power_fraction(schedule) == pytest.approx(7.48 / 12.0, rel=1e-12)


def test_setup_totals_cost_co2_and_difference_by_hand():
    # By hand: before 20 × 100 W × 4100 h = 8200 kWh; option 20 × 40 W × 4100 h × 0.75 = 2460 kWh;
    # difference −5740 kWh, × 0.25 per kWh = −1435, × 0.2 kg/kWh = −1148 kg, relative −0.7.
    common = dict(n_luminaires=20, tariff_per_kwh=0.25, grid_factor_kg_per_kwh=0.2)
    before = annual_energy(EnergyInputs(input_watts_w=100.0, **common))
    half = DimmingSchedule.from_tuples([(6.0, 12.0, 0.5)])
    option = annual_energy(EnergyInputs(input_watts_w=40.0, schedule=half, **common))
    assert before.annual_kwh == pytest.approx(8200.0, rel=1e-12)
    assert option.annual_kwh == pytest.approx(2460.0, rel=1e-12)
    diff = energy_difference(before, option)
    assert diff.annual_kwh == pytest.approx(-5740.0, rel=1e-12)
    assert diff.annual_cost == pytest.approx(-1435.0, rel=1e-12)
    assert diff.annual_co2_kg == pytest.approx(-1148.0, rel=1e-12)
    assert diff.relative == pytest.approx(-0.7, rel=1e-12)
    json.dumps(before.to_json())
    json.dumps(diff.to_json())


def test_constant_light_output_and_lifetime_by_hand():
    # By hand (the stated linear CLO model): MF = 0.8 -> mean power (1 + 0.8)/2 = 0.9 of full;
    # 100 W × 4100 h × 0.9 = 369 kWh; 100 000 h of life / 4100 h = 24.39 years.
    inputs = EnergyInputs(input_watts_w=100.0, maintenance_factor=0.8, constant_light_output=True, lifetime_h=100000.0)
    result = annual_energy(inputs)
    assert DEFAULT_ANNUAL_BURNING_HOURS == 4100.0
    assert result.annual_kwh_per_luminaire == pytest.approx(369.0, rel=1e-12)
    assert result.lifetime_years == pytest.approx(100000.0 / 4100.0, rel=1e-12)
    assert result.lifetime_kwh_per_luminaire == pytest.approx(369.0 * 100000.0 / 4100.0, rel=1e-12)
    # Without CLO the maintenance factor does not change the energy.
    plain = annual_energy(dataclasses.replace(inputs, constant_light_output=False))
    assert plain.annual_kwh_per_luminaire == pytest.approx(410.0, rel=1e-12)


def test_input_watts_from_file_or_given():
    # The built-in generic files carry no input watts (LM-63 field 0): the user must give them.
    p = load_photometry("generic-isotropic")
    with pytest.raises(InputError, match="input watts"):
        input_watts(p)
    assert input_watts(p, 35.0) == 35.0
    assert input_watts(dataclasses.replace(p, input_watts=42.0)) == 42.0


@pytest.mark.parametrize(
    "steps",
    [[(0.0, 13.0, 0.5)], [(2.0, 1.0, 0.5)], [(0.0, 6.0, 1.5)], [(0.0, 6.0, 0.5), (5.0, 8.0, 0.2)], [(1.0, 2.0)]],
)
def test_bad_schedule_is_an_input_error(steps):
    with pytest.raises(InputError):
        DimmingSchedule.from_tuples(steps, night_hours=12.0)
