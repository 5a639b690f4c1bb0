"""The circuit model's small arithmetic (source: hand calculation, written out)."""

from dataclasses import fields

from extract.circuit import CAP_PART_NAMES, CapParts


def test_cap_parts_add_every_part():
    # hand calculation: each part is the sum of the same part of both sides
    a = CapParts(1.0, 2.0, 3.0, 4.0, 5.0, 6.0)
    b = CapParts(10.0, 20.0, 30.0, 40.0, 50.0, 60.0)
    assert (a + b).as_dict() == dict(zip(CAP_PART_NAMES, (11.0, 22.0, 33.0, 44.0, 55.0, 66.0)))


def test_cap_part_names_are_the_fields_in_order():
    # __add__ and as_dict rely on CAP_PART_NAMES naming every field in order
    assert tuple(f.name for f in fields(CapParts)) == CAP_PART_NAMES
