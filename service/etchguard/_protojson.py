"""A protobuf message as the JSON the command line prints: the API's own field names
and units, one serializer for every message.

It follows the protobuf JSON mapping's shape with ``preserving_proto_field_name``, with
three choices made for people and scripts reading a terminal: 64-bit integers stay
numbers (the mapping writes them as strings), every field is written (a field with
presence that is unset as ``null``, so a script finds every key), and an enum value is
its word, the name without the enum's prefix in lower case (``OPTION_STATUS_LEGAL`` ->
``"legal"``; the unspecified value -> ``""``), the words of the package's kinds.
Non-finite doubles are written as the mapping writes them (``"Infinity"``).
"""

from __future__ import annotations

from typing import Any

from google.protobuf.descriptor import EnumDescriptor, FieldDescriptor
from google.protobuf.message import Message

from ._results import json_number


def message_dict(msg: Message) -> dict[str, Any]:
    """Every field of ``msg`` under its proto name (see the module docstring)."""
    out: dict[str, Any] = {}
    for f in msg.DESCRIPTOR.fields:
        value = getattr(msg, f.name)
        if f.message_type is not None and f.message_type.GetOptions().map_entry:
            value_field = f.message_type.fields_by_name["value"]
            out[f.name] = {str(k): _value(value_field, v) for k, v in value.items()}
        elif f.is_repeated:
            out[f.name] = [_value(f, v) for v in value]
        elif f.has_presence and not msg.HasField(f.name):
            out[f.name] = None
        else:
            out[f.name] = _value(f, value)
    return out


def _value(f: FieldDescriptor, value: Any) -> Any:
    if f.type == FieldDescriptor.TYPE_MESSAGE:
        return message_dict(value)
    if f.type == FieldDescriptor.TYPE_ENUM:
        return enum_word(f.enum_type, value)
    if f.type in (FieldDescriptor.TYPE_DOUBLE, FieldDescriptor.TYPE_FLOAT):
        return json_number(value)
    return value


def enum_word(enum: EnumDescriptor, number: int) -> str:
    """``OPTION_STATUS_BLOCKED`` of ``OptionStatus`` -> ``"blocked"``; unspecified -> ``""``."""
    prefix = "".join("_" + c if c.isupper() and i else c for i, c in enumerate(enum.name)).upper() + "_"
    name = enum.values_by_number[number].name if number in enum.values_by_number else str(number)
    word = name.removeprefix(prefix).lower()
    return "" if word == "unspecified" else word
