"""The frozen dataclasses whose __init__ is written by hand (they are built per heat, and the generated
one sets each field through object.__setattr__) take the same arguments as the generated one would
and stay frozen."""

from __future__ import annotations

import dataclasses
import inspect

import numpy as np
import pytest

from meltfix.plan.heat_load import HeatLoad
from meltfix.plan.planner import _Temperature
from meltfix.plan.result import Addition, Later, LimitCheck, Plan

HAND_WRITTEN = (Addition, LimitCheck, HeatLoad, _Temperature)


@pytest.mark.parametrize("cls", HAND_WRITTEN, ids=lambda cls: cls.__name__)
def test_the_init_takes_every_field_in_order_with_its_default(cls: type) -> None:
    parameters = list(inspect.signature(cls.__init__).parameters.values())[1:]  # self aside
    fields = dataclasses.fields(cls)
    assert [p.name for p in parameters] == [f.name for f in fields]
    for parameter, field in zip(parameters, fields):
        assert parameter.kind == (inspect.Parameter.KEYWORD_ONLY if field.kw_only
                                  else inspect.Parameter.POSITIONAL_OR_KEYWORD), field.name
        default = field.default if field.default is not dataclasses.MISSING else inspect.Parameter.empty
        assert parameter.default == default, field.name


def _plan() -> Plan:
    check = LimitCheck("Mn", "max", 1.2, 1.0, 0.2)
    return Plan(heat_id="H1", grade="G", status="optimal", additions=(Addition("FeMn", 10.0, 12.5),),
                total_cost=12.5, bath_kg=1000.0, final_kg=1010.0, predicted_pct={"Mn": 1.0}, checks=(check,),
                violations=(), binding=Later(lambda: ()), cautions=("hot",), temperature_drop_c=1.5)


def test_the_instances_read_replace_and_compare_as_generated_ones_would() -> None:
    plan = _plan()
    assert plan.binding == () and plan.cautions == ("hot",) and plan.steps == () and plan.currency == "EUR"
    assert plan == _plan() and dataclasses.replace(plan, status="closest").status == "closest"
    assert hash(LimitCheck("Mn", "max", 1.2, 1.0, 0.2)) == hash(plan.checks[0])
    assert repr(Addition("FeMn", 10.0, 12.5)) == ("Addition(material='FeMn', kg=10.0, cost=12.5, packs=None, "
                                                  "pack_kg=None)")


@pytest.mark.parametrize("instance", [
    Addition("FeMn", 10.0, 12.5), LimitCheck("Mn", "max", 1.2, 1.0, 0.2), _plan(),
    _Temperature(1500.0, None, 0.0, 0.0, 0.0, 0.0),
    HeatLoad(*([np.zeros(1)] * 7), (), False, *([np.zeros(1)] * 2), (), *([np.zeros(1)] * 3), None,
             np.zeros(1), np.zeros(1), ()),
], ids=lambda instance: type(instance).__name__)
def test_the_instances_stay_frozen(instance: object) -> None:
    with pytest.raises(dataclasses.FrozenInstanceError):
        setattr(instance, dataclasses.fields(instance)[0].name, None)
