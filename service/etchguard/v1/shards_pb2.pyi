from . import etchguard_pb2 as _etchguard_pb2
from google.protobuf.internal import containers as _containers
from google.protobuf import descriptor as _descriptor
from google.protobuf import message as _message
from collections.abc import Iterable as _Iterable, Mapping as _Mapping
from typing import ClassVar as _ClassVar, Optional as _Optional, Union as _Union

DESCRIPTOR: _descriptor.FileDescriptor

class GetTopologyRequest(_message.Message):
    __slots__ = ("expected_fingerprint", "expected_shard")
    EXPECTED_FINGERPRINT_FIELD_NUMBER: _ClassVar[int]
    EXPECTED_SHARD_FIELD_NUMBER: _ClassVar[int]
    expected_fingerprint: int
    expected_shard: int
    def __init__(self, expected_fingerprint: _Optional[int] = ..., expected_shard: _Optional[int] = ...) -> None: ...

class TopologyInfo(_message.Message):
    __slots__ = ("shard", "shards", "addresses", "fingerprint", "directory_cell", "canonical_text")
    SHARD_FIELD_NUMBER: _ClassVar[int]
    SHARDS_FIELD_NUMBER: _ClassVar[int]
    ADDRESSES_FIELD_NUMBER: _ClassVar[int]
    FINGERPRINT_FIELD_NUMBER: _ClassVar[int]
    DIRECTORY_CELL_FIELD_NUMBER: _ClassVar[int]
    CANONICAL_TEXT_FIELD_NUMBER: _ClassVar[int]
    shard: int
    shards: int
    addresses: _containers.RepeatedScalarFieldContainer[str]
    fingerprint: int
    directory_cell: int
    canonical_text: str
    def __init__(self, shard: _Optional[int] = ..., shards: _Optional[int] = ..., addresses: _Optional[_Iterable[str]] = ..., fingerprint: _Optional[int] = ..., directory_cell: _Optional[int] = ..., canonical_text: _Optional[str] = ...) -> None: ...

class FindObstaclesRequest(_message.Message):
    __slots__ = ("net", "layer", "spacing", "rects")
    NET_FIELD_NUMBER: _ClassVar[int]
    LAYER_FIELD_NUMBER: _ClassVar[int]
    SPACING_FIELD_NUMBER: _ClassVar[int]
    RECTS_FIELD_NUMBER: _ClassVar[int]
    net: str
    layer: str
    spacing: int
    rects: _containers.RepeatedCompositeFieldContainer[_etchguard_pb2.Rect]
    def __init__(self, net: _Optional[str] = ..., layer: _Optional[str] = ..., spacing: _Optional[int] = ..., rects: _Optional[_Iterable[_Union[_etchguard_pb2.Rect, _Mapping]]] = ...) -> None: ...

class RectObstacles(_message.Message):
    __slots__ = ("conflicts",)
    CONFLICTS_FIELD_NUMBER: _ClassVar[int]
    conflicts: _containers.RepeatedCompositeFieldContainer[_etchguard_pb2.Conflict]
    def __init__(self, conflicts: _Optional[_Iterable[_Union[_etchguard_pb2.Conflict, _Mapping]]] = ...) -> None: ...

class FindObstaclesReply(_message.Message):
    __slots__ = ("per_rect",)
    PER_RECT_FIELD_NUMBER: _ClassVar[int]
    per_rect: _containers.RepeatedCompositeFieldContainer[RectObstacles]
    def __init__(self, per_rect: _Optional[_Iterable[_Union[RectObstacles, _Mapping]]] = ...) -> None: ...

class LayerCells(_message.Message):
    __slots__ = ("layer", "whole_layer", "cx", "cy")
    LAYER_FIELD_NUMBER: _ClassVar[int]
    WHOLE_LAYER_FIELD_NUMBER: _ClassVar[int]
    CX_FIELD_NUMBER: _ClassVar[int]
    CY_FIELD_NUMBER: _ClassVar[int]
    layer: str
    whole_layer: bool
    cx: _containers.RepeatedScalarFieldContainer[int]
    cy: _containers.RepeatedScalarFieldContainer[int]
    def __init__(self, layer: _Optional[str] = ..., whole_layer: _Optional[bool] = ..., cx: _Optional[_Iterable[int]] = ..., cy: _Optional[_Iterable[int]] = ...) -> None: ...

class MetalCells(_message.Message):
    __slots__ = ("shard", "fingerprint", "layers", "complete")
    SHARD_FIELD_NUMBER: _ClassVar[int]
    FINGERPRINT_FIELD_NUMBER: _ClassVar[int]
    LAYERS_FIELD_NUMBER: _ClassVar[int]
    COMPLETE_FIELD_NUMBER: _ClassVar[int]
    shard: int
    fingerprint: int
    layers: _containers.RepeatedCompositeFieldContainer[LayerCells]
    complete: bool
    def __init__(self, shard: _Optional[int] = ..., fingerprint: _Optional[int] = ..., layers: _Optional[_Iterable[_Union[LayerCells, _Mapping]]] = ..., complete: _Optional[bool] = ...) -> None: ...

class PublishMetalReply(_message.Message):
    __slots__ = ()
    def __init__(self) -> None: ...

class GetMetalRequest(_message.Message):
    __slots__ = ("expected_fingerprint",)
    EXPECTED_FINGERPRINT_FIELD_NUMBER: _ClassVar[int]
    expected_fingerprint: int
    def __init__(self, expected_fingerprint: _Optional[int] = ...) -> None: ...
