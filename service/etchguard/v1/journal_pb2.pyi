from google.protobuf.internal import containers as _containers
from google.protobuf import descriptor as _descriptor
from google.protobuf import message as _message
from collections.abc import Iterable as _Iterable, Mapping as _Mapping
from typing import ClassVar as _ClassVar, Optional as _Optional, Union as _Union

DESCRIPTOR: _descriptor.FileDescriptor

class ShapeColumns(_message.Message):
    __slots__ = ("layer", "xlo", "ylo", "xhi", "yhi", "id")
    LAYER_FIELD_NUMBER: _ClassVar[int]
    XLO_FIELD_NUMBER: _ClassVar[int]
    YLO_FIELD_NUMBER: _ClassVar[int]
    XHI_FIELD_NUMBER: _ClassVar[int]
    YHI_FIELD_NUMBER: _ClassVar[int]
    ID_FIELD_NUMBER: _ClassVar[int]
    layer: _containers.RepeatedScalarFieldContainer[int]
    xlo: _containers.RepeatedScalarFieldContainer[int]
    ylo: _containers.RepeatedScalarFieldContainer[int]
    xhi: _containers.RepeatedScalarFieldContainer[int]
    yhi: _containers.RepeatedScalarFieldContainer[int]
    id: _containers.RepeatedScalarFieldContainer[int]
    def __init__(self, layer: _Optional[_Iterable[int]] = ..., xlo: _Optional[_Iterable[int]] = ..., ylo: _Optional[_Iterable[int]] = ..., xhi: _Optional[_Iterable[int]] = ..., yhi: _Optional[_Iterable[int]] = ..., id: _Optional[_Iterable[int]] = ...) -> None: ...

class PinImage(_message.Message):
    __slots__ = ("name", "layer", "rects", "gate_area", "diff_area", "cell_area", "cell_side_area", "block_car", "rect_layers")
    class GateAreaEntry(_message.Message):
        __slots__ = ("key", "value")
        KEY_FIELD_NUMBER: _ClassVar[int]
        VALUE_FIELD_NUMBER: _ClassVar[int]
        key: str
        value: float
        def __init__(self, key: _Optional[str] = ..., value: _Optional[float] = ...) -> None: ...
    class CellAreaEntry(_message.Message):
        __slots__ = ("key", "value")
        KEY_FIELD_NUMBER: _ClassVar[int]
        VALUE_FIELD_NUMBER: _ClassVar[int]
        key: int
        value: float
        def __init__(self, key: _Optional[int] = ..., value: _Optional[float] = ...) -> None: ...
    class CellSideAreaEntry(_message.Message):
        __slots__ = ("key", "value")
        KEY_FIELD_NUMBER: _ClassVar[int]
        VALUE_FIELD_NUMBER: _ClassVar[int]
        key: int
        value: float
        def __init__(self, key: _Optional[int] = ..., value: _Optional[float] = ...) -> None: ...
    NAME_FIELD_NUMBER: _ClassVar[int]
    LAYER_FIELD_NUMBER: _ClassVar[int]
    RECTS_FIELD_NUMBER: _ClassVar[int]
    GATE_AREA_FIELD_NUMBER: _ClassVar[int]
    DIFF_AREA_FIELD_NUMBER: _ClassVar[int]
    CELL_AREA_FIELD_NUMBER: _ClassVar[int]
    CELL_SIDE_AREA_FIELD_NUMBER: _ClassVar[int]
    BLOCK_CAR_FIELD_NUMBER: _ClassVar[int]
    RECT_LAYERS_FIELD_NUMBER: _ClassVar[int]
    name: str
    layer: int
    rects: _containers.RepeatedScalarFieldContainer[int]
    gate_area: _containers.ScalarMap[str, float]
    diff_area: float
    cell_area: _containers.ScalarMap[int, float]
    cell_side_area: _containers.ScalarMap[int, float]
    block_car: _containers.RepeatedCompositeFieldContainer[BlockRatioImage]
    rect_layers: _containers.RepeatedScalarFieldContainer[int]
    def __init__(self, name: _Optional[str] = ..., layer: _Optional[int] = ..., rects: _Optional[_Iterable[int]] = ..., gate_area: _Optional[_Mapping[str, float]] = ..., diff_area: _Optional[float] = ..., cell_area: _Optional[_Mapping[int, float]] = ..., cell_side_area: _Optional[_Mapping[int, float]] = ..., block_car: _Optional[_Iterable[_Union[BlockRatioImage, _Mapping]]] = ..., rect_layers: _Optional[_Iterable[int]] = ...) -> None: ...

class BlockRatioImage(_message.Message):
    __slots__ = ("step", "measure", "oxide", "ratio")
    STEP_FIELD_NUMBER: _ClassVar[int]
    MEASURE_FIELD_NUMBER: _ClassVar[int]
    OXIDE_FIELD_NUMBER: _ClassVar[int]
    RATIO_FIELD_NUMBER: _ClassVar[int]
    step: int
    measure: str
    oxide: str
    ratio: float
    def __init__(self, step: _Optional[int] = ..., measure: _Optional[str] = ..., oxide: _Optional[str] = ..., ratio: _Optional[float] = ...) -> None: ...

class DeckLoadedRecord(_message.Message):
    __slots__ = ("toml",)
    TOML_FIELD_NUMBER: _ClassVar[int]
    toml: str
    def __init__(self, toml: _Optional[str] = ...) -> None: ...

class NetOpenedRecord(_message.Message):
    __slots__ = ("net", "pins", "has_layer_range", "lowest", "highest", "shapes", "first_id")
    NET_FIELD_NUMBER: _ClassVar[int]
    PINS_FIELD_NUMBER: _ClassVar[int]
    HAS_LAYER_RANGE_FIELD_NUMBER: _ClassVar[int]
    LOWEST_FIELD_NUMBER: _ClassVar[int]
    HIGHEST_FIELD_NUMBER: _ClassVar[int]
    SHAPES_FIELD_NUMBER: _ClassVar[int]
    FIRST_ID_FIELD_NUMBER: _ClassVar[int]
    net: str
    pins: _containers.RepeatedCompositeFieldContainer[PinImage]
    has_layer_range: bool
    lowest: int
    highest: int
    shapes: ShapeColumns
    first_id: int
    def __init__(self, net: _Optional[str] = ..., pins: _Optional[_Iterable[_Union[PinImage, _Mapping]]] = ..., has_layer_range: _Optional[bool] = ..., lowest: _Optional[int] = ..., highest: _Optional[int] = ..., shapes: _Optional[_Union[ShapeColumns, _Mapping]] = ..., first_id: _Optional[int] = ...) -> None: ...

class ShapesCommittedRecord(_message.Message):
    __slots__ = ("net", "shapes", "first_id")
    NET_FIELD_NUMBER: _ClassVar[int]
    SHAPES_FIELD_NUMBER: _ClassVar[int]
    FIRST_ID_FIELD_NUMBER: _ClassVar[int]
    net: str
    shapes: ShapeColumns
    first_id: int
    def __init__(self, net: _Optional[str] = ..., shapes: _Optional[_Union[ShapeColumns, _Mapping]] = ..., first_id: _Optional[int] = ...) -> None: ...

class ShapesRemovedRecord(_message.Message):
    __slots__ = ("net", "ids")
    NET_FIELD_NUMBER: _ClassVar[int]
    IDS_FIELD_NUMBER: _ClassVar[int]
    net: str
    ids: _containers.RepeatedScalarFieldContainer[int]
    def __init__(self, net: _Optional[str] = ..., ids: _Optional[_Iterable[int]] = ...) -> None: ...

class NetClosedRecord(_message.Message):
    __slots__ = ("net",)
    NET_FIELD_NUMBER: _ClassVar[int]
    net: str
    def __init__(self, net: _Optional[str] = ...) -> None: ...

class BlockageDeclaredRecord(_message.Message):
    __slots__ = ("blockage_id", "layer", "xlo", "ylo", "xhi", "yhi")
    BLOCKAGE_ID_FIELD_NUMBER: _ClassVar[int]
    LAYER_FIELD_NUMBER: _ClassVar[int]
    XLO_FIELD_NUMBER: _ClassVar[int]
    YLO_FIELD_NUMBER: _ClassVar[int]
    XHI_FIELD_NUMBER: _ClassVar[int]
    YHI_FIELD_NUMBER: _ClassVar[int]
    blockage_id: int
    layer: int
    xlo: int
    ylo: int
    xhi: int
    yhi: int
    def __init__(self, blockage_id: _Optional[int] = ..., layer: _Optional[int] = ..., xlo: _Optional[int] = ..., ylo: _Optional[int] = ..., xhi: _Optional[int] = ..., yhi: _Optional[int] = ...) -> None: ...

class BlockageRemovedRecord(_message.Message):
    __slots__ = ("blockage_id",)
    BLOCKAGE_ID_FIELD_NUMBER: _ClassVar[int]
    blockage_id: int
    def __init__(self, blockage_id: _Optional[int] = ...) -> None: ...

class JournalRecord(_message.Message):
    __slots__ = ("deck_loaded", "net_opened", "shapes_committed", "shapes_removed", "net_closed", "blockage_declared", "blockage_removed")
    DECK_LOADED_FIELD_NUMBER: _ClassVar[int]
    NET_OPENED_FIELD_NUMBER: _ClassVar[int]
    SHAPES_COMMITTED_FIELD_NUMBER: _ClassVar[int]
    SHAPES_REMOVED_FIELD_NUMBER: _ClassVar[int]
    NET_CLOSED_FIELD_NUMBER: _ClassVar[int]
    BLOCKAGE_DECLARED_FIELD_NUMBER: _ClassVar[int]
    BLOCKAGE_REMOVED_FIELD_NUMBER: _ClassVar[int]
    deck_loaded: DeckLoadedRecord
    net_opened: NetOpenedRecord
    shapes_committed: ShapesCommittedRecord
    shapes_removed: ShapesRemovedRecord
    net_closed: NetClosedRecord
    blockage_declared: BlockageDeclaredRecord
    blockage_removed: BlockageRemovedRecord
    def __init__(self, deck_loaded: _Optional[_Union[DeckLoadedRecord, _Mapping]] = ..., net_opened: _Optional[_Union[NetOpenedRecord, _Mapping]] = ..., shapes_committed: _Optional[_Union[ShapesCommittedRecord, _Mapping]] = ..., shapes_removed: _Optional[_Union[ShapesRemovedRecord, _Mapping]] = ..., net_closed: _Optional[_Union[NetClosedRecord, _Mapping]] = ..., blockage_declared: _Optional[_Union[BlockageDeclaredRecord, _Mapping]] = ..., blockage_removed: _Optional[_Union[BlockageRemovedRecord, _Mapping]] = ...) -> None: ...

class SnapshotHeader(_message.Message):
    __slots__ = ("covers_segments_below", "has_deck", "deck_toml", "blockages", "next_blockage_id", "net_count", "written_by")
    COVERS_SEGMENTS_BELOW_FIELD_NUMBER: _ClassVar[int]
    HAS_DECK_FIELD_NUMBER: _ClassVar[int]
    DECK_TOML_FIELD_NUMBER: _ClassVar[int]
    BLOCKAGES_FIELD_NUMBER: _ClassVar[int]
    NEXT_BLOCKAGE_ID_FIELD_NUMBER: _ClassVar[int]
    NET_COUNT_FIELD_NUMBER: _ClassVar[int]
    WRITTEN_BY_FIELD_NUMBER: _ClassVar[int]
    covers_segments_below: int
    has_deck: bool
    deck_toml: str
    blockages: _containers.RepeatedCompositeFieldContainer[BlockageDeclaredRecord]
    next_blockage_id: int
    net_count: int
    written_by: str
    def __init__(self, covers_segments_below: _Optional[int] = ..., has_deck: _Optional[bool] = ..., deck_toml: _Optional[str] = ..., blockages: _Optional[_Iterable[_Union[BlockageDeclaredRecord, _Mapping]]] = ..., next_blockage_id: _Optional[int] = ..., net_count: _Optional[int] = ..., written_by: _Optional[str] = ...) -> None: ...

class NetImage(_message.Message):
    __slots__ = ("net", "pins", "has_layer_range", "lowest", "highest", "shapes", "next_id")
    NET_FIELD_NUMBER: _ClassVar[int]
    PINS_FIELD_NUMBER: _ClassVar[int]
    HAS_LAYER_RANGE_FIELD_NUMBER: _ClassVar[int]
    LOWEST_FIELD_NUMBER: _ClassVar[int]
    HIGHEST_FIELD_NUMBER: _ClassVar[int]
    SHAPES_FIELD_NUMBER: _ClassVar[int]
    NEXT_ID_FIELD_NUMBER: _ClassVar[int]
    net: str
    pins: _containers.RepeatedCompositeFieldContainer[PinImage]
    has_layer_range: bool
    lowest: int
    highest: int
    shapes: ShapeColumns
    next_id: int
    def __init__(self, net: _Optional[str] = ..., pins: _Optional[_Iterable[_Union[PinImage, _Mapping]]] = ..., has_layer_range: _Optional[bool] = ..., lowest: _Optional[int] = ..., highest: _Optional[int] = ..., shapes: _Optional[_Union[ShapeColumns, _Mapping]] = ..., next_id: _Optional[int] = ...) -> None: ...

class SnapshotEnd(_message.Message):
    __slots__ = ("net_count", "shape_count")
    NET_COUNT_FIELD_NUMBER: _ClassVar[int]
    SHAPE_COUNT_FIELD_NUMBER: _ClassVar[int]
    net_count: int
    shape_count: int
    def __init__(self, net_count: _Optional[int] = ..., shape_count: _Optional[int] = ...) -> None: ...
